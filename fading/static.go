package fading

import "math"

// staticSource is the f_D = 0 channel: one complex Gaussian draw CN(0, 1)
// per tap, held for ever.
type staticSource struct {
	re, im []float64
}

func newStaticSource(nt int, seed uint64, user int) *staticSource {
	s := &staticSource{re: make([]float64, nt), im: make([]float64, nt)}
	for l := range s.re {
		r := NewStream(seed, user, l, StreamTap)
		s.re[l] = r.NormFloat64() * math.Sqrt2 / 2
		s.im[l] = r.NormFloat64() * math.Sqrt2 / 2
	}
	return s
}

func (s *staticSource) blockLen() int { return 256 }

func (s *staticSource) next(scale []float64, re, im [][]float64) {
	for l := range re {
		a, b := scale[l]*s.re[l], scale[l]*s.im[l]
		for i := range re[l] {
			re[l][i] = a
			im[l][i] = b
		}
	}
}

// skip does nothing: every block is the same constant draw.
func (s *staticSource) skip(int) {}
