package fading

import "math"

// The interpolator brings a process generated at an internal rate
// f_int = fs·step (step <= 1) to the sample rate fs: a Kaiser-windowed sinc
// (cut-off at half the internal rate, β = interpBeta) over interpTaps
// internal samples, tabulated at interpPhases fractional positions (the
// nearest one is used) with the weights of every position normalised to
// sum 1. For a process band-limited to |f| <= 0.2 f_int (the internal rates
// used here keep f_D <= 0.2 f_int) the complex error of an interpolated tone
// is at most 1.6e-3 (filter and phase rounding together) and its mean error
// power −62 dB relative to the signal (TestInterpolatorAccuracy).
const (
	interpTaps   = 8   // nodes k-3 .. k+4 around position k+u
	interpBefore = 3   // nodes before k
	interpPhases = 512 // tabulated fractional positions
	interpBeta   = 6.5 // Kaiser window shape
)

// interpTable[p*interpTaps+j] is the weight of node k-3+j at position
// k + p/interpPhases, p = 0..interpPhases.
var interpTable = makeInterpTable()

func besselI0(x float64) float64 {
	s, t := 1.0, 1.0
	for k := 1; k < 60; k++ {
		t *= (x / 2) / float64(k)
		s += t * t
	}
	return s
}

func makeInterpTable() []float64 {
	tab := make([]float64, (interpPhases+1)*interpTaps)
	half := float64(interpTaps) / 2
	for p := 0; p <= interpPhases; p++ {
		u := float64(p) / interpPhases
		sum := 0.0
		w := tab[p*interpTaps : (p+1)*interpTaps]
		for j := range w {
			x := u - float64(j-interpBefore)
			if math.Abs(x) >= half {
				continue
			}
			r := x / half
			win := besselI0(interpBeta*math.Sqrt(1-r*r)) / besselI0(interpBeta)
			s := 1.0
			if x != 0 {
				s = math.Sin(math.Pi*x) / (math.Pi * x)
			}
			w[j] = s * win
			sum += w[j]
		}
		for j := range w {
			w[j] /= sum
		}
	}
	return tab
}
