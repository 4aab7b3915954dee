package fading

import (
	"math"
	"math/bits"
	"math/rand/v2"

	"gonum.org/v1/gonum/dsp/fourier"
)

// spectralSource is the inverse-FFT generator after Young & Beaulieu (IEEE
// Trans. Commun. 48(7), 2000): each block of N internal samples is the
// inverse DFT of independent complex Gaussian bin values shaped by the
// Clarke filter,
//
//	x(t) = Σ_k √S_k g_k e^{j2πkt/N},  g_k ~ CN(0, 1),
//	S_k  = ∫ over bin k of the Clarke spectrum (exact bin power, Σ S_k = 1),
//
// so that each block is a circularly stationary complex Gaussian process of
// unit power with autocorrelation Σ_k S_k e^{−j2πkτ/N} ≈ J0(2πντ).
// Consecutive blocks overlap by N/2 and are joined with sine windows,
// y = cos(πi/N) x_{s−1}(N/2+i) + sin(πi/N) x_s(i): since the blocks are
// independent and cos² + sin² = 1 the power is exactly constant across
// joins, and the autocorrelation at lag τ is multiplied by cos(πτ/N) ≈ 1.
type spectralSource struct {
	nt, n, h  int
	fft       *fourier.CmplxFFT
	amp       []float64 // √S_k by FFT index (0..N-1)
	nz        []int     // indices with S_k > 0
	rng       []*rand.Rand
	coef      []complex128
	prev, cur [][]complex128
	cosW      []float64 // cos(πi/N), i < N/2
	sinW      []float64 // sin(πi/N)
	started   bool
	pend      [][]complex128 // per tap: bin values (by nz) of the block gen transforms, or of the last block skip passed over (transform pending)
	raw       bool           // pend holds a block whose transform is pending (skip)
}

// spectralBlockLen returns the FFT length for normalised Doppler nu: a power
// of two with at least 128 bins inside the Doppler band, and at least 512.
func spectralBlockLen(nu float64) int {
	want := int(math.Ceil(64 / nu))
	n := 1 << bits.Len(uint(want-1))
	return max(n, 512)
}

func newSpectralSource(nt int, nu float64, seed uint64, user int) *spectralSource {
	n := spectralBlockLen(nu)
	s := &spectralSource{nt: nt, n: n, h: n / 2, fft: fourier.NewCmplxFFT(n), amp: make([]float64, n),
		coef: make([]complex128, n), rng: make([]*rand.Rand, nt),
		prev: make([][]complex128, nt), cur: make([][]complex128, nt), pend: make([][]complex128, nt),
		cosW: make([]float64, n/2), sinW: make([]float64, n/2)}
	for k := 0; k < n; k++ {
		kk := k
		if k >= n/2 {
			kk = k - n
		}
		lo, hi := (float64(kk)-0.5)/float64(n), (float64(kk)+0.5)/float64(n)
		p := clarkeCDF(hi, nu) - clarkeCDF(lo, nu)
		if p > 0 {
			s.amp[k] = math.Sqrt(p)
			s.nz = append(s.nz, k)
		}
	}
	for i := range s.cosW {
		s.sinW[i], s.cosW[i] = math.Sincos(math.Pi * float64(i) / float64(n))
	}
	for l := 0; l < nt; l++ {
		s.rng[l] = NewStream(seed, user, l, StreamTap)
		s.prev[l] = make([]complex128, n)
		s.cur[l] = make([]complex128, n)
		s.pend[l] = make([]complex128, len(s.nz))
	}
	return s
}

func (s *spectralSource) blockLen() int { return s.h }

// gen writes one new independent block of tap l into dst.
func (s *spectralSource) gen(l int, dst []complex128) {
	s.bins(s.rng[l], s.pend[l])
	s.transform(s.pend[l], dst)
}

// bins draws one block's in-band bin values from r into p (by nz).
func (s *spectralSource) bins(r *rand.Rand, p []complex128) {
	for i, k := range s.nz {
		a := s.amp[k] * math.Sqrt2 / 2
		p[i] = complex(a*r.NormFloat64(), a*r.NormFloat64())
	}
}

// transform writes the block whose in-band bin values are p (by nz; the
// other bins of coef stay zero) into dst.
func (s *spectralSource) transform(p, dst []complex128) {
	for i, k := range s.nz {
		s.coef[k] = p[i]
	}
	s.fft.Sequence(dst, s.coef)
}

func (s *spectralSource) next(scale []float64, re, im [][]float64) {
	for l := 0; l < s.nt; l++ {
		if s.raw { // the block skip drew last: transform it now
			s.transform(s.pend[l], s.cur[l])
		}
		if !s.started {
			s.gen(l, s.prev[l])
		} else {
			s.prev[l], s.cur[l] = s.cur[l], s.prev[l]
		}
		s.gen(l, s.cur[l])
		g := scale[l]
		prev, cur := s.prev[l][s.h:], s.cur[l][:s.h]
		r, q := re[l][:s.h], im[l][:s.h]
		for i := range r {
			cw, sw := g*s.cosW[i], g*s.sinW[i]
			r[i] = cw*real(prev[i]) + sw*real(cur[i])
			q[i] = cw*imag(prev[i]) + sw*imag(cur[i])
		}
	}
	s.started, s.raw = true, false
}

// skip advances past n blocks as n calls of next would: the bin draws of
// every block are consumed in gen's order, and only the bin values of the
// last block (the outgoing one of the following block) are kept, for next
// to transform.
func (s *spectralSource) skip(n int) {
	if n <= 0 {
		return
	}
	blocks := n // blocks drawn by n calls of next
	if !s.started {
		blocks++ // the first call also draws the outgoing block
	}
	for l := 0; l < s.nt; l++ {
		for range blocks {
			s.bins(s.rng[l], s.pend[l]) // the last block's values stay
		}
	}
	s.started, s.raw = true, true
}
