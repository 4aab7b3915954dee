package fading

import (
	"math"
	"math/rand/v2"
	"sync"
)

// gsosSource is the generator of GeneratorDefault: a sum of sinusoids with
// Gaussian amplitudes, re-drawn at regular intervals and joined by
// power-preserving cross-fades.
//
// A set of sinusoids holds, for each of the in-phase and quadrature
// branches, M sinusoids
//
//	X(k) = Σ_n A_n cos(2πν k cos α_n) + B_n sin(2πν k cos α_n)   (quadrature: sin α_n)
//	α_n  = (2πn − π + θ_n)/(4M),  θ_n ~ U[−π, π),  A_n, B_n ~ N(0, 1/(2M)),
//
// with ν = f_D / internal rate. The arrival angles are stratified over the
// quadrant as in Zheng & Xiao (IEEE Trans. Commun. 51(6), 2003), so the
// ensemble autocorrelation of each branch is exactly J0(2πνk)/2 and the
// branches are uncorrelated; the Gaussian amplitudes make every sample
// exactly complex Gaussian (Rayleigh envelope, exponential power) for any M,
// where equal amplitudes give a sum of M cosines whose deep-fade tail is
// measurably thin for M = 8–16.
//
// A set lives for gsosHop + gsosOverlap internal samples; a new independent
// set starts every gsosHop samples. Over the overlap the outgoing set is
// weighted cos(πi/(2W)) and the incoming one sin(πi/(2W)): the sets are
// independent, so the power stays exactly constant and the autocorrelation
// at lag τ is multiplied by at worst cos(πτ/(2W)) (> 0.992 at τ = 1/f_D, over a quarter of the time).
// Re-drawing makes time averages converge to ensemble averages (ergodic
// power), at the cost of a residual correlation of the power within a set
// (variance of the set power 1/(2M)).
type gsosSource struct {
	nt, m   int
	nu      float64
	hop, ov int          // samples between set starts, overlap W
	rng     []*rand.Rand // per tap
	old     []gsosSet    // per tap: the set started one hop ago
	cur     []gsosSet    // per tap: the set starting at this block
	tmp     []float64    // scratch: overlap samples of the outgoing set
	st      []float64    // scratch: oscillator states
	cosW    []float64    // cos(πi/(2W)) (crossfade: shared, read only)
	sinW    []float64    // sin(πi/(2W)) (crossfade: shared, read only)
	started bool
	raw     bool // cur holds drawRaw's draws, finish pending (skip)
}

// gsosSet is one set of sinusoids of one tap: 2M oscillators, the first M
// in-phase, the last M quadrature, y(k) = A cos(Δk) + B sin(Δk).
type gsosSet struct {
	delta, a, b, cosD, sinD, coef []float64
}

// Set lifetime in Doppler periods: a new set every gsosPeriods/ν samples,
// overlapping the previous one by a quarter of that.
const gsosPeriods = 50

func newGSOSSource(nt, m int, nu float64, seed uint64, user int) *gsosSource {
	hop := max(64, int(math.Ceil(gsosPeriods/nu)))
	ov := hop / 4
	s := &gsosSource{nt: nt, m: m, nu: nu, hop: hop, ov: ov,
		rng: make([]*rand.Rand, nt), old: make([]gsosSet, nt), cur: make([]gsosSet, nt),
		tmp: make([]float64, ov), st: make([]float64, 2*m)}
	s.cosW, s.sinW = crossfade(ov)
	for l := 0; l < nt; l++ {
		s.rng[l] = NewStream(seed, user, l, StreamTap)
		s.old[l] = newGSOSSet(m)
		s.cur[l] = newGSOSSet(m)
	}
	return s
}

// crossfade returns the cross-fade weights cos(πi/(2W)) and sin(πi/(2W)),
// i < W, computed once per W and shared (read only) by every source.
func crossfade(w int) (cos, sin []float64) {
	if v, ok := crossfades.Load(w); ok {
		cs := v.([2][]float64)
		return cs[0], cs[1]
	}
	cos, sin = make([]float64, w), make([]float64, w)
	for i := range cos {
		sin[i], cos[i] = math.Sincos(math.Pi / 2 * float64(i) / float64(w))
	}
	v, _ := crossfades.LoadOrStore(w, [2][]float64{cos, sin})
	cs := v.([2][]float64)
	return cs[0], cs[1]
}

// crossfades holds crossfade's weights by W (hop/4: 62 for every
// decimating generator, at most 83 at the sample rate: a few dozen
// entries at most).
var crossfades sync.Map

func newGSOSSet(m int) gsosSet {
	n := 2 * m
	f := make([]float64, 6*n)
	return gsosSet{delta: f[:n:n], a: f[n : 2*n : 2*n], b: f[2*n : 3*n : 3*n],
		cosD: f[3*n : 4*n : 4*n], sinD: f[4*n : 5*n : 5*n], coef: f[5*n:]}
}

// draw fills set with new independent parameters from r.
func (s *gsosSource) draw(set *gsosSet, r *rand.Rand) {
	s.drawRaw(set, r)
	s.finish(set)
}

// drawRaw takes a set's draws from r: per oscillator θ (kept in delta until
// finish), A and B.
func (s *gsosSource) drawRaw(set *gsosSet, r *rand.Rand) {
	sd := math.Sqrt(1 / (2 * float64(s.m)))
	for i := 0; i < 2*s.m; i++ {
		set.delta[i] = math.Pi * (2*r.Float64() - 1)
		set.a[i], set.b[i] = sd*r.NormFloat64(), sd*r.NormFloat64()
	}
}

// finish turns the θ of drawRaw into the oscillators' increments and
// recursion coefficients.
func (s *gsosSource) finish(set *gsosSet) {
	m := s.m
	for b := 0; b < 2; b++ {
		for n := 0; n < m; n++ {
			i := b*m + n
			alpha := (2*math.Pi*float64(n+1) - math.Pi + set.delta[i]) / float64(4*m)
			f := math.Cos(alpha)
			if b == 1 {
				f = math.Sin(alpha)
			}
			d := 2 * math.Pi * s.nu * f
			set.delta[i] = d
			set.sinD[i], set.cosD[i] = math.Sincos(d)
			set.coef[i] = 2 * set.cosD[i]
		}
	}
}

func (s *gsosSource) blockLen() int { return s.hop }

// eval writes (first) or adds g·Σ of the branch's oscillators (offset off
// into the set: 0 in-phase, M quadrature) for set-relative samples
// k0..k0+len(dst)-1.
func (s *gsosSource) eval(set *gsosSet, off int, dst []float64, k0 int, g float64) {
	m := s.m
	a, p := s.st[:m:m], s.st[m:2*m:2*m]
	fk := float64(k0)
	for n := 0; n < m; n++ {
		i := off + n
		sn, cs := 0.0, 1.0
		if k0 != 0 {
			sn, cs = math.Sincos(set.delta[i] * fk)
		}
		// y(k0) and y(k0−1) from cos, sin of Δk0 and Δ(k0−1)
		cp, sp := cs*set.cosD[i]+sn*set.sinD[i], sn*set.cosD[i]-cs*set.sinD[i]
		a[n] = g * (set.a[i]*cs + set.b[i]*sn)
		p[n] = g * (set.a[i]*cp + set.b[i]*sp)
	}
	oscSum(dst, set.coef[off:off+m:off+m], a, p)
}

func (s *gsosSource) next(scale []float64, re, im [][]float64) {
	for l := 0; l < s.nt; l++ {
		r := s.rng[l]
		if s.raw {
			s.finish(&s.cur[l]) // drawn by skip
		}
		if !s.started {
			s.draw(&s.old[l], r)
		} else {
			s.old[l], s.cur[l] = s.cur[l], s.old[l]
		}
		s.draw(&s.cur[l], r)
		g := scale[l]
		for b, dst := range [2][]float64{re[l][:s.hop], im[l][:s.hop]} {
			off := b * s.m
			s.eval(&s.cur[l], off, dst, 0, g)
			s.eval(&s.old[l], off, s.tmp, s.hop, g)
			ov := dst[:s.ov]
			for i := range ov {
				ov[i] = s.sinW[i]*ov[i] + s.cosW[i]*s.tmp[i]
			}
		}
	}
	s.started, s.raw = true, false
}

// skip advances past n blocks as n calls of next would: the random draws
// of every set are consumed in next's order, and only the last set (the
// outgoing one of the following block) is kept, its increments computed by
// the next call of next (finish).
func (s *gsosSource) skip(n int) {
	if n <= 0 {
		return
	}
	sets := n // sets drawn by n calls of next
	if !s.started {
		sets++ // the first call also draws the outgoing set
	}
	for l := 0; l < s.nt; l++ {
		for range sets {
			s.drawRaw(&s.cur[l], s.rng[l]) // the last set's draws stay
		}
	}
	s.started, s.raw = true, true
}
