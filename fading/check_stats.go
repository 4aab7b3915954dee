package fading

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// The estimators (mean and ratio with their standard errors, level
// crossings) and the theoretical values the Check lines are measured
// against (Jakes LCR/AFD, Gamma CDF and dB moments, Rician K).

// meanSE returns the mean of x and its standard error sd/√n.
func meanSE(x []float64) (mean, se float64) {
	n := float64(len(x))
	for _, v := range x {
		mean += v
	}
	mean /= n
	ss := 0.0
	for _, v := range x {
		ss += (v - mean) * (v - mean)
	}
	if len(x) > 1 {
		se = math.Sqrt(ss / (n - 1) / n)
	}
	return mean, se
}

// ratioSE returns Σa/Σb and its standard error by the delta method over the
// per-link pairs (a_i, b_i).
func ratioSE(a, b []float64) (ratio, se float64) {
	var sa, sb float64
	for i := range a {
		sa += a[i]
		sb += b[i]
	}
	if sb == 0 {
		return math.NaN(), math.NaN()
	}
	ratio = sa / sb
	n := float64(len(a))
	mb := sb / n
	ss := 0.0
	for i := range a {
		d := a[i] - ratio*b[i]
		ss += d * d
	}
	if n > 1 {
		se = math.Sqrt(ss/(n-1)/n) / mb
	}
	return ratio, se
}

// lcrTheory returns N_R/f_D and f_D·AFD for threshold rho (linear, rms 1).
func lcrTheory(rho float64) (lcr, afd float64) {
	s := math.Sqrt(2 * math.Pi)
	return s * rho * math.Exp(-rho*rho), (math.Exp(rho*rho) - 1) / (rho * s)
}

// crossings returns the number of down-crossings of level th by pw and the
// number of samples below it.
func crossings(pw []float64, th float64) (down, below float64) {
	nd, nb := 0, 0
	prevAbove := pw[0] >= th
	for _, v := range pw {
		above := v >= th
		if !above {
			nb++
			if prevAbove {
				nd++
			}
		}
		prevAbove = above
	}
	return float64(nd), float64(nb)
}

// gammaCDF is the Gamma(L, 1) CDF (gonum distuv).
func gammaCDF(L int, x float64) float64 {
	return distuv.Gamma{Alpha: float64(L), Beta: 1}.CDF(x)
}

// powerDBTheory returns the mean and standard deviation in dB of
// 10 log10(G/L) for G ~ Gamma(L, 1): (10/ln 10)(ψ(L) − ln L) and
// (10/ln 10)√ψ'(L), with ψ(L) = −γ + Σ_{k<L} 1/k and ψ'(L) = π²/6 − Σ_{k<L} 1/k².
func powerDBTheory(L int) (mean, std float64) {
	psi, tri := -0.57721566490153286, math.Pi*math.Pi/6
	for k := 1; k < L; k++ {
		psi += 1 / float64(k)
		tri -= 1 / float64(k*k)
	}
	c := 10 / math.Ln10
	return c * (psi - math.Log(float64(L))), c * math.Sqrt(tri)
}

// ricianKFromMoments is the moment-based K estimate from the mean ga and
// variance gv of the power |h|².
func ricianKFromMoments(ga, gv float64) float64 {
	d := ga*ga - gv
	if d <= 0 {
		return 0
	}
	sd := math.Sqrt(d)
	return sd / (ga - sd)
}
