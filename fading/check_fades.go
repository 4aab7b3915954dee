package fading

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/stat/distuv"
)

// The Check lines of a fading process in time: autocorrelation,
// level-crossing rate and fade duration (also at deep thresholds), and
// the distribution of the power (Kolmogorov–Smirnov).

func (r *checkRun) dynamic(fdT float64) error {
	links := r.cfg.Links
	c := r.base()
	var shallow, deep []float64
	for _, th := range checkThresholds {
		_, afd := lcrTheory(math.Pow(10, th/20))
		if afd/fdT >= checkSamplesPerFade {
			shallow = append(shallow, th)
		} else {
			deep = append(deep, th)
		}
	}
	// Autocorrelation lags in samples (distinct, at most a quarter record).
	var lagD []int
	for _, ft := range checkLags {
		d := max(1, int(math.Round(ft/fdT)))
		if !slices.Contains(lagD, d) {
			lagD = append(lagD, d)
		}
	}
	so := max(1, int(math.Round(0.02/fdT))) // origin stride: 50 per Doppler period
	sk := max(1, int(math.Round(1/fdT)))    // KS stride: one Doppler period

	meanPow := make([]float64, links)
	originPow := make([]float64, links)
	acf := make([][]float64, len(lagD))    // per link: mean of Re h(t+τ)h*(t)
	acfPow := make([][]float64, len(lagD)) // per link: mean of |h(t)|² over the same origins
	for j := range acf {
		acf[j] = make([]float64, links)
		acfPow[j] = make([]float64, links)
	}
	down := make([][]float64, len(shallow))
	below := make([][]float64, len(shallow))
	for j := range down {
		down[j] = make([]float64, links)
		below[j] = make([]float64, links)
	}
	dbMean, dbSq := make([]float64, links), make([]float64, links)
	out10 := make([]float64, links)
	var ks []float64
	nRec := 0
	for u := 0; u < links; u++ {
		if err := r.ctx.Err(); err != nil {
			return err
		}
		n, err := r.single(c, fdT, u, 0)
		if err != nil {
			return err
		}
		nRec = n
		pw, re, im := r.pw[:n], r.re[0][:n], r.im[0][:n]
		s := 0.0
		for _, v := range pw {
			s += v
		}
		meanPow[u] = s / float64(n)
		w0 := min(n, so)
		s = 0
		for _, v := range pw[:w0] {
			s += v
		}
		originPow[u] = s / float64(w0)
		for j, d := range lagD {
			if d >= n/4 {
				acf[j][u] = math.NaN()
				continue
			}
			s, p, cnt := 0.0, 0.0, 0
			for i := 0; i+d < n; i += so {
				s += re[i]*re[i+d] + im[i]*im[i+d]
				p += pw[i]
				cnt++
			}
			acf[j][u] = s / float64(cnt)
			acfPow[j][u] = p / float64(cnt)
		}
		for j, th := range shallow {
			dn, bl := crossings(pw, math.Pow(10, th/10))
			down[j][u], below[j][u] = dn, bl
		}
		s, sq, cnt := 0.0, 0.0, 0
		thr10 := 0.1 // 10 dB below the unit mean
		o := 0
		for i := 0; i < n; i += so {
			x := 10 * math.Log10(pw[i])
			s += x
			sq += x * x
			cnt++
			if pw[i] < thr10 {
				o++
			}
		}
		dbMean[u], dbSq[u] = s/float64(cnt), sq/float64(cnt)
		out10[u] = float64(o) / float64(cnt)
		for i := 0; i < n; i += sk {
			ks = append(ks, pw[i])
		}
	}
	m, se := meanSE(meanPow)
	r.add(CheckLine{Name: "mean power of a unit-power tap", Kind: "mean-power", Measured: m, Theory: 1, FdT: fdT}, se, allowPower)
	m, se = meanSE(originPow)
	r.add(CheckLine{Name: fmt.Sprintf("ensemble power over the first %s (stationarity)", countSamples(so)), Kind: "origin-power", Measured: m, Theory: 1, FdT: fdT}, se, allowPower)
	for j, d := range lagD {
		if math.IsNaN(acf[j][0]) {
			continue
		}
		ft := float64(d) * fdT
		m, se := ratioSE(acf[j], acfPow[j])
		r.add(CheckLine{Name: fmt.Sprintf("autocorrelation at f_D·τ = %.4f vs J0(2π f_D τ)", ft), Kind: "autocorrelation",
			Arg: ft, Measured: m, Theory: math.J0(2 * math.Pi * ft), FdT: fdT}, se, allowAutocorr)
	}
	r.addCrossings(shallow, down, below, nRec, fdT)
	if len(deep) > 0 {
		if err := r.deep(deep); err != nil {
			return err
		}
	}
	// Kolmogorov–Smirnov distance from Exponential(1).
	slices.Sort(ks)
	exp := distuv.Exponential{Rate: 1}
	dmax := 0.0
	nk := float64(len(ks))
	for i, v := range ks {
		f := exp.CDF(v)
		dmax = math.Max(dmax, math.Max(float64(i+1)/nk-f, f-float64(i)/nk))
	}
	infl := 0.0 // Σ_k J0²(2π k sk fdT): correlation of power samples sk apart
	for k := 1; k <= int(r.cfg.DopplerPeriods); k++ {
		j := math.J0(2 * math.Pi * float64(k*sk) * fdT)
		infl += j * j
	}
	r.add(CheckLine{Name: fmt.Sprintf("Kolmogorov–Smirnov distance of the power from Exponential(1), %d samples", len(ks)),
		Kind: "power-ks", Measured: dmax, Theory: 0, FdT: fdT}, 0, ksC/math.Sqrt(nk)*math.Sqrt(1+2*infl))
	r.addDB(1, dbMean, dbSq, fdT)
	m, se = meanSE(out10)
	r.add(CheckLine{Name: "outage 10 dB below the mean, L = 1", Kind: "mrc-outage", Arg: 10, Branches: 1,
		Measured: m, Theory: gammaCDF(1, 0.1), FdT: fdT}, se, allowOutRel*gammaCDF(1, 0.1))
	for _, L := range []int{2, 4} {
		if err := r.mrc(L, fdT); err != nil {
			return err
		}
	}
	if r.cfg.Channel.LOS {
		if err := r.rician(fdT); err != nil {
			return err
		}
	}
	if len(r.cfg.Channel.Profile.Taps) > 1 {
		if err := r.profile(fdT); err != nil {
			return err
		}
	}
	return nil
}

func (r *checkRun) addCrossings(ths []float64, down, below [][]float64, n int, fdT float64) {
	for j, th := range ths {
		lcr, afd := lcrTheory(math.Pow(10, th/20))
		// per-link LCR N_R/f_D = down-crossings / (n f_D T)
		rates := make([]float64, len(down[j]))
		for u, d := range down[j] {
			rates[u] = d / (float64(n) * fdT)
		}
		m, se := meanSE(rates)
		r.add(CheckLine{Name: fmt.Sprintf("level-crossing rate N_R/f_D at ρ = %g dB", th), Kind: "lcr", Arg: th,
			Measured: m, Theory: lcr, FdT: fdT}, se, allowLCRRel*lcr)
		// f_D·AFD = Σ below·f_D·T / Σ down-crossings
		bt := make([]float64, len(below[j]))
		for u, b := range below[j] {
			bt[u] = b * fdT
		}
		m, se = ratioSE(bt, down[j])
		r.add(CheckLine{Name: fmt.Sprintf("average fade duration f_D·AFD at ρ = %g dB", th), Kind: "afd", Arg: th,
			Measured: m, Theory: afd, FdT: fdT}, se, allowLCRRel*afd)
	}
}

// deep measures the crossing statistics of thresholds whose fades are too
// short at the configured rate, on records at f_D·T = checkDeepFdT.
func (r *checkRun) deep(ths []float64) error {
	c := r.base()
	c.SampleRateHz = c.DopplerHz / checkDeepFdT
	links := r.cfg.Links
	down := make([][]float64, len(ths))
	below := make([][]float64, len(ths))
	for j := range ths {
		down[j] = make([]float64, links)
		below[j] = make([]float64, links)
	}
	n := 0
	for u := 0; u < links; u++ {
		if err := r.ctx.Err(); err != nil {
			return err
		}
		var err error
		n, err = r.single(c, checkDeepFdT, u, 0x9e37)
		if err != nil {
			return err
		}
		for j, th := range ths {
			down[j][u], below[j][u] = crossings(r.pw[:n], math.Pow(10, th/10))
		}
	}
	r.addCrossings(ths, down, below, n, checkDeepFdT)
	return nil
}

// countSamples is "1 sample", "n samples".
func countSamples(n int) string {
	if n == 1 {
		return "1 sample"
	}
	return fmt.Sprintf("%d samples", n)
}
