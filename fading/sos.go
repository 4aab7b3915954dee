package fading

import "math"

// sosBlock is the number of internal samples per block of the
// sum-of-sinusoids source; every oscillator is re-derived exactly from its
// absolute phase at the start of each block, so rounding errors of the
// recursion cannot accumulate beyond one block.
const sosBlock = 512

// oscBank is one real branch (in-phase or quadrature) of one tap: m
// sinusoids cos(Δ_n k + φ_n), k the internal sample index.
type oscBank struct {
	delta, phase, cosD, sinD, coef []float64 // Δ_n (rad/sample), φ_n, cos Δ_n, sin Δ_n, 2 cos Δ_n
}

// sosSource is the sum-of-sinusoids model after Zheng & Xiao (IEEE Trans.
// Commun. 51(6), 2003). For a unit-power tap with M sinusoids per branch,
//
//	h(k) = √(1/M) Σ_n cos(2πν k cos α_n + φ_n) + j √(1/M) Σ_n cos(2πν k sin α_n + ϕ_n),
//	α_n = (2πn − π + θ_n)/(4M), n = 1..M,
//
// with θ_n, φ_n, ϕ_n independent and uniform and ν = f_D / internal rate.
// The arrival angles are stratified over the quadrant, so the ensemble
// autocorrelation of each branch is exactly J0(2πν k)/2 and the in-phase /
// quadrature cross-correlation is exactly zero for any M. All sinusoids
// have the same gain, so each realisation has exactly unit time-average
// power. Each cosine is produced by the two-term recursion
// y_{k+1} = 2 cos Δ · y_k − y_{k−1}, restarted exactly every sosBlock samples.
type sosSource struct {
	nt, m int
	norm  float64
	banks []oscBank // 2 per tap: [2l] in-phase, [2l+1] quadrature
	k0    int64     // internal index of the next block
	st    []float64 // scratch: per-oscillator states (a, b) of a block
}

func newSOSSource(nt, m int, nu float64, seed uint64, user int) *sosSource {
	s := &sosSource{nt: nt, m: m, norm: math.Sqrt(1 / float64(m)), banks: make([]oscBank, 2*nt), st: make([]float64, 2*m)}
	for l := 0; l < nt; l++ {
		r := NewStream(seed, user, l, StreamTap)
		bi, bq := newOscBank(m), newOscBank(m)
		for n := 0; n < m; n++ {
			theta := math.Pi * (2*r.Float64() - 1)
			alpha := (2*math.Pi*float64(n+1) - math.Pi + theta) / float64(4*m)
			bi.set(n, 2*math.Pi*nu*math.Cos(alpha), 2*math.Pi*r.Float64())
			bq.set(n, 2*math.Pi*nu*math.Sin(alpha), 2*math.Pi*r.Float64())
		}
		s.banks[2*l], s.banks[2*l+1] = bi, bq
	}
	return s
}

func newOscBank(m int) oscBank {
	f := make([]float64, 5*m)
	return oscBank{delta: f[:m:m], phase: f[m : 2*m : 2*m], cosD: f[2*m : 3*m : 3*m], sinD: f[3*m : 4*m : 4*m], coef: f[4*m:]}
}

func (b *oscBank) set(n int, delta, phase float64) {
	b.delta[n], b.phase[n] = delta, phase
	b.sinD[n], b.cosD[n] = math.Sincos(delta)
	b.coef[n] = 2 * b.cosD[n]
}

func (s *sosSource) blockLen() int { return sosBlock }

func (s *sosSource) next(scale []float64, re, im [][]float64) {
	k0 := s.k0
	s.k0 += sosBlock
	for l := 0; l < s.nt; l++ {
		g := scale[l] * s.norm
		s.fillBank(&s.banks[2*l], re[l][:sosBlock], k0, g)
		s.fillBank(&s.banks[2*l+1], im[l][:sosBlock], k0, g)
	}
}

// skip advances past n blocks: every block is evaluated from the exact
// phases at its absolute index, so only that index moves.
func (s *sosSource) skip(n int) { s.k0 += int64(n) * sosBlock }

// fillBank writes g Σ_n cos(Δ_n k + φ_n) for k = k0..k0+len(dst)-1.
func (s *sosSource) fillBank(b *oscBank, dst []float64, k0 int64, g float64) {
	m := s.m
	a, p := s.st[:m:m], s.st[m:2*m:2*m] // value at k0 and at k0-1
	fk := float64(k0)
	for n := 0; n < m; n++ {
		sn, cs := math.Sincos(b.phase[n] + b.delta[n]*fk)
		a[n] = g * cs
		p[n] = g * (cs*b.cosD[n] + sn*b.sinD[n]) // cos(θ−Δ)
	}
	oscSum(dst, b.coef[:m], a, p)
}

// oscSum writes Σ_n of the cosine recursions x_{k+1} = c_n x_k − x_{k−1}
// (current values a, previous p) for len(dst) samples to dst: groups of
// sixteen in assembly where available, then groups of four (osc4) and
// single ones (osc1), each group added in turn.
func oscSum(dst []float64, c, a, p []float64) {
	m := len(c)
	n := 0
	first := true
	for ; n+16 <= m; n += 16 {
		if !osc16(dst, first, c[n:n+16], a[n:n+16], p[n:n+16]) {
			break
		}
		first = false
	}
	for ; n+4 <= m; n += 4 {
		osc4(dst, first, c[n], c[n+1], c[n+2], c[n+3], a[n], a[n+1], a[n+2], a[n+3], p[n], p[n+1], p[n+2], p[n+3])
		first = false
	}
	for ; n < m; n++ {
		osc1(dst, first, c[n], a[n], p[n])
		first = false
	}
}

// osc4 writes (first) or adds the sum of four cosine recursions with
// coefficients c*, current values a* and previous values b* to dst.
func osc4(dst []float64, first bool, c0, c1, c2, c3, a0, a1, a2, a3, b0, b1, b2, b3 float64) {
	if first {
		for i := range dst {
			dst[i] = (a0 + a1) + (a2 + a3)
			a0, b0 = c0*a0-b0, a0
			a1, b1 = c1*a1-b1, a1
			a2, b2 = c2*a2-b2, a2
			a3, b3 = c3*a3-b3, a3
		}
		return
	}
	for i := range dst {
		dst[i] += (a0 + a1) + (a2 + a3)
		a0, b0 = c0*a0-b0, a0
		a1, b1 = c1*a1-b1, a1
		a2, b2 = c2*a2-b2, a2
		a3, b3 = c3*a3-b3, a3
	}
}

// osc1 is osc4 for one oscillator.
func osc1(dst []float64, first bool, c, a, b float64) {
	if first {
		for i := range dst {
			dst[i] = a
			a, b = c*a-b, a
		}
		return
	}
	for i := range dst {
		dst[i] += a
		a, b = c*a-b, a
	}
}
