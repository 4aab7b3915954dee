package loop

import (
	"math"
	"sync"

	"gonum.org/v1/gonum/stat/distuv"
)

// tQuantile is the two-sided 95 % Student t quantile with dof degrees of
// freedom (gonum distuv).
func tQuantile(dof int) float64 {
	if dof <= 0 {
		return 0
	}
	tqMu.Lock()
	defer tqMu.Unlock()
	if q, ok := tqCache[dof]; ok {
		return q
	}
	q := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(dof)}.Quantile(0.975)
	if len(tqCache) < 4096 {
		tqCache[dof] = q
	}
	return q
}

// StudentT95 is the two-sided 95 % Student t quantile with dof degrees of
// freedom (gonum distuv, cached), 0 for dof <= 0: the quantile of every
// interval of the engines (loop and loop/multicell).
func StudentT95(dof int) float64 { return tQuantile(dof) }

// WilsonInterval is the Wilson score interval of a proportion p with n
// samples and quantile z (Wilson, J. Am. Stat. Assoc. 22, 1927), inside
// [0, 1]; (p, p) when n <= 0.
func WilsonInterval(p, n, z float64) (lo, hi float64) { return wilson(p, n, z) }

var (
	tqMu    sync.Mutex
	tqCache = map[int]float64{}
)

const z95 = 1.959963984540054

// wilson is the Wilson score interval of a proportion p with n samples and
// quantile z (Wilson, J. Am. Stat. Assoc. 22, 1927); always inside [0, 1]
// and always holding p (which the exact interval does; at p = 0 or 1 the
// rounding of c − h or c + h would otherwise leave it out by about 1e-20).
func wilson(p, n, z float64) (lo, hi float64) {
	if !(n > 0) {
		return p, p
	}
	z2 := z * z
	den := 1 + z2/n
	c := (p + z2/(2*n)) / den
	h := z * math.Sqrt(p*(1-p)/n+z2/(4*n*n)) / den
	return min(math.Max(0, c-h), p), max(math.Min(1, c+h), p)
}

// combined is one statistic of a set: value, standard error and its
// degrees of freedom.
type combined struct {
	v, se float64
	dof   int
	ok    bool
}

// combine is the statistic over replications: with one, its own value
// and batch-means standard error; with R > 1, the mean of the values, the
// standard error of that mean from their spread and R−1 degrees of freedom
// (the caller replaces the value by the pooled one where it has it).
func combine(vals []float64, ses []float64, dofs []int) combined {
	R := len(vals)
	if R == 0 {
		return combined{}
	}
	if R == 1 {
		return combined{v: vals[0], se: ses[0], dof: dofs[0], ok: true}
	}
	m := 0.0
	for _, x := range vals {
		m += x
	}
	m /= float64(R)
	v := 0.0
	for _, x := range vals {
		v += (x - m) * (x - m)
	}
	v /= float64(R - 1)
	return combined{v: m, se: math.Sqrt(v / float64(R)), dof: R - 1, ok: true}
}

// half is the t half-width (0 without spread).
func (c combined) half() float64 {
	h := tQuantile(c.dof) * c.se
	if c.dof == 0 || !(h >= 0) {
		return 0
	}
	return h
}

// estimate is value ± t·se (a quantity without limits).
func (c combined) estimate() Estimate {
	h := c.half()
	return Estimate{Value: c.v, CILow: c.v - h, CIHigh: c.v + h}
}

// within is value ± t·se clamped to the quantity's range [lo, hi].
func (c combined) within(lo, hi float64) Estimate {
	e := c.estimate()
	e.Value = min(max(e.Value, lo), hi)
	e.CILow = min(max(e.CILow, lo), e.Value)
	e.CIHigh = max(min(e.CIHigh, hi), e.Value)
	return e
}

// positive is the interval of a positive quantity on the log scale:
// value·exp(±t·se/value) (delta method), never below zero.
func (c combined) positive() Estimate {
	if !(c.v > 0) {
		return Estimate{Value: math.Max(c.v, 0), CILow: math.Max(c.v, 0), CIHigh: math.Max(c.v, 0)}
	}
	h := c.half() / c.v
	return Estimate{Value: c.v, CILow: c.v * math.Exp(-h), CIHigh: c.v * math.Exp(h)}
}

// proportion is the Wilson interval with n_eff = p(1−p)/se² (the sample
// size a binomial proportion with this standard error would have), capped
// at the samples, and the t quantile of the spread's degrees of freedom (z
// without spread). When the spread says nothing (p = 0 or 1, or equal
// values in every batch), n_eff is the independent samples indep (one per
// decorrelation time), not the correlated samples.
func (c combined) proportion(samples, indep float64) Estimate {
	nEff := math.Min(samples, indep)
	z := z95 // binomial on the independent samples: no variance estimated
	if c.se > 0 && c.v > 0 && c.v < 1 {
		nEff = math.Min(samples, c.v*(1-c.v)/(c.se*c.se))
		if c.dof > 0 {
			z = tQuantile(c.dof) // the variance comes from dof+1 values
		}
	}
	v := min(max(c.v, 0), 1)
	lo, hi := wilson(v, nEff, z)
	return Estimate{Value: v, CILow: min(lo, v), CIHigh: max(hi, v)}
}

// independentSamples bounds the independent samples among n user-slots
// (or n blocks of slotsEach slots) of a set of users over reps
// replications: one per decorrelation time, and at least one per user and
// replication (users' channels and replications are independent).
func (sh *shared) independentSamples(n int64, slotsEach float64, users, reps int) float64 {
	x := float64(n)
	if sh.decorrSlots > slotsEach {
		x *= slotsEach / sh.decorrSlots
	}
	return math.Min(float64(n), math.Max(x, float64(users*reps)))
}
