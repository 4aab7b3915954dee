package fading

import (
	"fmt"
	"math"
	"testing"
)

// TestAssemblyMatchesGo: with AVX the interpolator and the oscillators run
// in assembly (interp_amd64.s); they must give the Go code's results bit
// for bit (same operations in the same order), so a run's figures do not
// depend on the machine. Every generator, several sinusoid counts (16 and
// 32 go through the sixteen-wide kernel, 20 and 7 also through the Go
// remainder), decimated and direct rates, chunked calls.
func TestAssemblyMatchesGo(t *testing.T) {
	if !useAVX {
		t.Skip("no AVX on this machine: only the Go code runs")
	}
	defer func(v bool) { useAVX = v }(useAVX)
	profs := []Profile{
		{Name: "1tap", Taps: []Tap{{0, 0}}},
		{Name: "3tap", Taps: []Tap{{0, 0}, {310, -1}, {710, -9}}},
		{Name: "7tap", Taps: []Tap{{0, 0}, {100, -1}, {200, -2}, {300, -3}, {500, -8}, {700, -10}, {900, -12}}},
	}
	for _, prof := range profs {
		for _, g := range []Generator{GeneratorDefault, GeneratorSumOfSinusoids, GeneratorSpectral} {
			for _, m := range []int{0, 7, 16, 20, 32} {
				for _, fdT := range []float64{0.037, 0.0037, 0.3} {
					name := fmt.Sprintf("%s/%v/M=%d/fdT=%g", prof.Name, g, m, fdT)
					gains := func(avx bool) []float64 {
						useAVX = avx
						ch, err := NewChannel(ChannelConfig{DopplerHz: fdT * 1500, SampleRateHz: 1500, Profile: prof, Generator: g, Sinusoids: m}, 11, 3)
						if err != nil {
							t.Fatal(err)
						}
						out := make([]float64, 6000)
						for off, n := 0, 1; off < len(out); off, n = off+n, n*2+1 {
							ch.FillGains(out[off:min(off+n, len(out))])
						}
						return out
					}
					a, b := gains(true), gains(false)
					for i := range a {
						if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
							t.Fatalf("%s: sample %d: assembly %v, Go %v", name, i, a[i], b[i])
						}
					}
				}
			}
		}
	}
}
