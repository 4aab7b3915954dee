package fading

import (
	"fmt"
	"math"
)

// The Check lines of combined branches and taps: the power in dB and the
// outage under maximal-ratio combining, the Rician K and the gain of a
// multipath profile.

func (r *checkRun) addDB(L int, dbMean, dbSq []float64, fdT float64) {
	tm, ts := powerDBTheory(L)
	m, se := meanSE(dbMean)
	r.add(CheckLine{Name: fmt.Sprintf("mean of the power in dB, L = %d", L), Kind: "power-db-mean", Branches: L,
		Measured: m, Theory: tm, Unit: "dB", FdT: fdT}, se, allowDB)
	// per-link standard deviations
	sd := make([]float64, len(dbMean))
	var pm, psq float64
	for u := range dbMean {
		sd[u] = math.Sqrt(math.Max(0, dbSq[u]-dbMean[u]*dbMean[u]))
		pm += dbMean[u]
		psq += dbSq[u]
	}
	n := float64(len(dbMean))
	pooled := math.Sqrt(math.Max(0, psq/n-(pm/n)*(pm/n)))
	_, se = meanSE(sd)
	r.add(CheckLine{Name: fmt.Sprintf("standard deviation of the power in dB, L = %d", L), Kind: "power-db-std", Branches: L,
		Measured: pooled, Theory: ts, Unit: "dB", FdT: fdT}, se, allowDB)
}

func (r *checkRun) mrc(L int, fdT float64) error {
	c := r.base()
	c.Profile = Profile{Name: fmt.Sprintf("%d equal taps", L)}
	for l := 0; l < L; l++ {
		c.Profile.Taps = append(c.Profile.Taps, Tap{DelayNs: float64(l), PowerDB: 0})
	}
	links := r.cfg.Links
	n := r.recordLen(fdT)
	r.ensure(n)
	g := r.pw[:n]
	margins := mrcMargins[L]
	out := make([][]float64, len(margins))
	for j := range out {
		out[j] = make([]float64, links)
	}
	dbMean, dbSq := make([]float64, links), make([]float64, links)
	so := max(1, int(math.Round(0.02/fdT)))
	for u := 0; u < links; u++ {
		if err := r.ctx.Err(); err != nil {
			return err
		}
		ch, err := r.mk(c, r.cfg.Seed+uint64(L)<<32, u)
		if err != nil {
			return err
		}
		ch.FillGains(g)
		for j, x := range margins {
			th := math.Pow(10, -x/10) / float64(L) // per-branch mean is 1/L
			cnt := 0
			for _, v := range g {
				if v < th {
					cnt++
				}
			}
			out[j][u] = float64(cnt) / float64(n)
		}
		s, sq, cnt := 0.0, 0.0, 0
		for i := 0; i < n; i += so {
			x := 10 * math.Log10(g[i])
			s += x
			sq += x * x
			cnt++
		}
		dbMean[u], dbSq[u] = s/float64(cnt), sq/float64(cnt)
	}
	for j, x := range margins {
		th := gammaCDF(L, math.Pow(10, -x/10))
		m, se := meanSE(out[j])
		r.add(CheckLine{Name: fmt.Sprintf("MRC outage, L = %d, per-branch mean %g dB above the threshold, vs Gamma(L,1) CDF", L, x),
			Kind: "mrc-outage", Arg: x, Branches: L, Measured: m, Theory: th, FdT: fdT}, se, allowOutRel*th)
	}
	r.addDB(L, dbMean, dbSq, fdT)
	return nil
}

// rician checks the first tap with its LOS component: mean power and the K
// factor recovered from the moments of the power pooled over all links,
// K = √(Ga² − Gv)/(Ga − √(Ga² − Gv)) with Ga = E|h|², Gv = Var|h|²
// (pooling avoids the bias of per-link estimates from short records); its
// standard error is the delete-one-link jackknife.
func (r *checkRun) rician(fdT float64) error {
	c := r.base()
	c.LOS = true
	c.RicianKDB, c.LOSAngleRad = r.cfg.Channel.RicianKDB, r.cfg.Channel.LOSAngleRad
	links := r.cfg.Links
	pows := make([]float64, links)
	s1, s2 := make([]float64, links), make([]float64, links)
	var t1, t2, tn float64
	nn := 0
	for u := 0; u < links; u++ {
		if err := r.ctx.Err(); err != nil {
			return err
		}
		n, err := r.single(c, fdT, u, 0x51ce)
		if err != nil {
			return err
		}
		nn = n
		var s, sq float64
		for _, v := range r.pw[:n] {
			s += v
			sq += v * v
		}
		s1[u], s2[u] = s, sq
		t1, t2, tn = t1+s, t2+sq, tn+float64(n)
		pows[u] = s / float64(n)
	}
	m, se := meanSE(pows)
	r.add(CheckLine{Name: "mean power of the Rician tap", Kind: "mean-power", Measured: m, Theory: 1, FdT: fdT}, se, allowPower)
	kOf := func(a, b, n float64) float64 {
		ga := a / n
		return ricianKFromMoments(ga, b/n-ga*ga)
	}
	kAll := kOf(t1, t2, tn)
	jk := make([]float64, links)
	mean := 0.0
	for u := range jk {
		jk[u] = kOf(t1-s1[u], t2-s2[u], tn-float64(nn))
		mean += jk[u] / float64(links)
	}
	ss := 0.0
	for _, v := range jk {
		ss += (v - mean) * (v - mean)
	}
	seK := math.Sqrt(float64(links-1) / float64(links) * ss)
	k := math.Pow(10, r.cfg.Channel.RicianKDB/10)
	r.add(CheckLine{Name: fmt.Sprintf("Rician K (linear) from the moments of the power, K = %g dB", r.cfg.Channel.RicianKDB),
		Kind: "rician-k", Arg: r.cfg.Channel.RicianKDB, Measured: kAll, Theory: k, FdT: fdT}, seK, 0.02*k+0.02)
	return nil
}

func (r *checkRun) profile(fdT float64) error {
	c := r.cfg.Channel
	links := r.cfg.Links
	n := r.recordLen(fdT)
	r.ensure(n)
	g := r.pw[:n]
	means := make([]float64, links)
	for u := 0; u < links; u++ {
		if err := r.ctx.Err(); err != nil {
			return err
		}
		ch, err := r.mk(c, r.cfg.Seed+0x7a11, u)
		if err != nil {
			return err
		}
		ch.FillGains(g)
		s := 0.0
		for _, v := range g {
			s += v
		}
		means[u] = s / float64(n)
	}
	m, se := meanSE(means)
	name := c.Profile.Name
	if name == "" {
		name = "custom"
	}
	r.add(CheckLine{Name: fmt.Sprintf("mean combined gain Σ|h_l|² of profile %s (%d taps)", name, len(c.Profile.Taps)),
		Kind: "profile-gain", Branches: len(c.Profile.Taps), Measured: m, Theory: 1, FdT: fdT}, se, allowPower)
	return nil
}
