package tune

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// ReplicationEstimate is a figure estimated from independent replications, with a
// two-sided confidence interval.
//
// Mean is the sample mean of the per-replication values; [Low, High] is the
// Student-t interval Mean ± t_{n−1,(1+c)/2} · s/√n at the confidence level c
// of the request (s the sample standard deviation over the n replications).
// N is the number of replications behind the estimate. With N < 2 there is no
// interval and Low = High = Mean. Units are those of the figure it carries.
type ReplicationEstimate struct {
	Mean float64 `json:"mean"`
	Low  float64 `json:"low"`
	High float64 `json:"high"`
	N    int     `json:"n"`
}

// Excludes reports whether v lies outside the interval [Low, High].
func (e ReplicationEstimate) Excludes(v float64) bool { return v < e.Low || v > e.High }

// HalfWidth is (High − Low)/2.
func (e ReplicationEstimate) HalfWidth() float64 { return (e.High - e.Low) / 2 }

// tQuantile returns the p-quantile of Student's t distribution with nu
// degrees of freedom (gonum distuv.StudentsT).
func tQuantile(p float64, nu int) float64 {
	if nu < 1 {
		return math.Inf(1)
	}
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(nu)}.Quantile(p)
}

// meanCI returns the Student-t interval of the mean of xs at confidence conf.
// The sum is taken in index order, so the result depends only on the values.
func meanCI(xs []float64, conf float64) ReplicationEstimate {
	n := len(xs)
	if n == 0 {
		return ReplicationEstimate{Mean: math.NaN(), Low: math.NaN(), High: math.NaN()}
	}
	var sum float64
	for _, x := range xs {
		sum += x
	}
	m := sum / float64(n)
	if n < 2 {
		return ReplicationEstimate{Mean: m, Low: m, High: m, N: n}
	}
	var ss float64
	for _, x := range xs {
		d := x - m
		ss += d * d
	}
	sd := math.Sqrt(ss / float64(n-1))
	h := tQuantile(0.5+conf/2, n-1) * sd / math.Sqrt(float64(n))
	return ReplicationEstimate{Mean: m, Low: m - h, High: m + h, N: n}
}

// pairedDiff returns the paired-t interval of mean(b_r − a_r) over the first
// n = min(len(a), len(b)) replications (common random numbers: replication r
// of both used the same seed). Positive means b is larger than a.
func pairedDiff(a, b []float64, conf float64, buf []float64) (ReplicationEstimate, []float64) {
	n := min(len(a), len(b))
	buf = buf[:0]
	for r := 0; r < n; r++ {
		buf = append(buf, b[r]-a[r])
	}
	return meanCI(buf, conf), buf
}

// clampEstimate limits an estimate of a probability to [0, 1].
func clampEstimate(e ReplicationEstimate, lo, hi float64) ReplicationEstimate {
	e.Low = math.Max(lo, e.Low)
	e.High = math.Min(hi, e.High)
	e.Mean = math.Min(hi, math.Max(lo, e.Mean))
	return e
}
