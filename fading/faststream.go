package fading

import (
	"math"
	"math/bits"
)

// FastStream is a random stream for hot loops (for example every user's
// shadowing updates and control draws in a multi-cell layout): the
// xoshiro256++ generator (Blackman & Vigna, "Scrambled linear pseudorandom
// number generators", ACM Trans. Math. Softw. 47(4), 2021), uniform draws
// from its top 53 bits and normal draws by the ziggurat method with 128
// layers (Marsaglia & Tsang, "The ziggurat method for generating random
// variables", J. Stat. Softw. 5(8), 2000). It is a value (embed it, copy
// it into a local for a loop of draws): no interface call and no pointer
// per draw, unlike a rand.Rand (BenchmarkFastStream,
// BenchmarkNormFloat64PCG).
//
// Normal draws are exactly N(0, 1) up to the 32-bit resolution of the
// ziggurat's layer coordinate (steps of about 2e-9 near 0, as math/rand's
// NormFloat64). Not safe for concurrent use.
type FastStream struct{ s0, s1, s2, s3 uint64 }

// NewFastStream returns the stream of process (user, index, kind)
// of a run seeded with seed: xoshiro256++ with its four state words from
// the hash chain of NewStream (streamHash), so it is deterministic in its
// arguments and independent of every other stream for all practical
// purposes.
func NewFastStream(seed uint64, user, index int, kind StreamKind) FastStream {
	h := streamHash(seed, user, index, kind)
	g := FastStream{
		s0: splitmix64(h ^ 0x2545f4914f6cdd1d),
		s1: splitmix64(h ^ 0x9fb21c651e98df25),
		s2: splitmix64(h ^ 0xd1342543de82ef95),
		s3: splitmix64(h ^ 0xaf251af3b0f025b5),
	}
	if g.s0|g.s1|g.s2|g.s3 == 0 { // the one state xoshiro cannot leave
		g.s3 = 1
	}
	return g
}

// Uint64 is the next xoshiro256++ output (xoshiroStep).
func (g *FastStream) Uint64() uint64 {
	var r uint64
	r, g.s0, g.s1, g.s2, g.s3 = xoshiroStep(g.s0, g.s1, g.s2, g.s3)
	return r
}

// xoshiroStep is one xoshiro256++ step on the state (s0, s1, s2, s3): the
// output rotl(s0 + s3, 23) + s0 and the state's linear step (Blackman &
// Vigna 2021, xoshiro256plusplus.c). The generator's one implementation,
// on values so that a loop of draws can keep the state in registers
// (NormFill).
func xoshiroStep(s0, s1, s2, s3 uint64) (r, n0, n1, n2, n3 uint64) {
	r = bits.RotateLeft64(s0+s3, 23) + s0
	t := s1 << 17
	s2 ^= s0
	s3 ^= s1
	s1 ^= s2
	s0 ^= s3
	s2 ^= t
	s3 = bits.RotateLeft64(s3, 45)
	return r, s0, s1, s2, s3
}

// Norm is the next standard normal draw (ziggurat: one Uint64 for about
// 98.8 % of the draws, the wedges and the tail beyond zigR in norm).
func (g *FastStream) Norm() float64 {
	j, i, x, ok := zigStep(g.Uint64())
	if ok {
		return x
	}
	return g.norm(j, i, x)
}

// NormFill fills dst with standard normal draws: the values of len(dst)
// calls of Norm, in order, with the stream's state in four locals for the
// loop (never addressed, so the compiler keeps them in registers; the
// rare wedge and tail draws store them back around norm).
func (g *FastStream) NormFill(dst []float64) {
	s0, s1, s2, s3 := g.s0, g.s1, g.s2, g.s3
	for k := range dst {
		var r uint64
		r, s0, s1, s2, s3 = xoshiroStep(s0, s1, s2, s3)
		j, i, x, ok := zigStep(r)
		if !ok {
			g.s0, g.s1, g.s2, g.s3 = s0, s1, s2, s3
			x = g.norm(j, i, x)
			s0, s1, s2, s3 = g.s0, g.s1, g.s2, g.s3
		}
		dst[k] = x
	}
	g.s0, g.s1, g.s2, g.s3 = s0, s1, s2, s3
}

// zigStep is the ziggurat's first step on one output u: the signed layer
// coordinate j, the layer i, the point x, and whether x lies inside the
// layer's rectangle (then it is the draw).
func zigStep(u uint64) (j int32, i uint64, x float64, ok bool) {
	j = int32(u)
	i = u >> 32 & 0x7f
	x = float64(j) * zigW[i]
	return j, i, x, absInt32(j) < zigK[i]
}

// norm finishes a draw that fell outside the rectangle of layer i: the
// base layer's tail beyond zigR, or a layer's wedge; rejected points start
// a new draw.
func (g *FastStream) norm(j int32, i uint64, x float64) float64 {
	for {
		if i == 0 {
			// Tail beyond zigR (Marsaglia 1964): x = −ln(U1)/r, y = −ln(U2),
			// accepted when 2y > x².
			for {
				x = -math.Log(g.unit()) / zigR
				y := -math.Log(g.unit())
				if y+y > x*x {
					break
				}
			}
			if j > 0 {
				return zigR + x
			}
			return -zigR - x
		}
		if zigF[i]+g.unit()*(zigF[i-1]-zigF[i]) < math.Exp(-0.5*x*x) {
			return x
		}
		var ok bool
		if j, i, x, ok = zigStep(g.Uint64()); ok {
			return x
		}
	}
}

// Float64 is a uniform draw in [0, 1): the top 53 bits of Uint64 over
// 2^53, as math/rand's Float64.
func (g *FastStream) Float64() float64 {
	return float64(g.Uint64()>>11) * (1.0 / (1 << 53))
}

// unit is a uniform draw in (0, 1]: 53 bits, never 0 (for the logarithms).
func (g *FastStream) unit() float64 {
	return float64(g.Uint64()>>11+1) * (1.0 / (1 << 53))
}

func absInt32(j int32) uint32 {
	m := j >> 31
	return uint32((j ^ m) - m)
}

// Ziggurat of 128 layers of equal area zigV under the normal density
// e^(−x²/2) (Marsaglia & Tsang 2000, RNOR): the base layer reaches zigR.
// zigK[i] is the layer's rectangle edge over its width in 2^31 units,
// zigW[i] the width over 2^31, zigF[i] the density at the layer's edge.
const (
	zigR = 3.442619855899
	zigV = 9.91256303526217e-3
)

var zigK [128]uint32
var zigW, zigF [128]float64

func init() {
	const m1 = 1 << 31
	dn, tn := zigR, zigR
	q := zigV / math.Exp(-0.5*dn*dn)
	zigK[0] = uint32(dn / q * m1)
	zigK[1] = 0
	zigW[0] = q / m1
	zigW[127] = dn / m1
	zigF[0] = 1
	zigF[127] = math.Exp(-0.5 * dn * dn)
	for i := 126; i >= 1; i-- {
		dn = math.Sqrt(-2 * math.Log(zigV/dn+math.Exp(-0.5*dn*dn)))
		zigK[i+1] = uint32(dn / tn * m1)
		tn = dn
		zigF[i] = math.Exp(-0.5 * dn * dn)
		zigW[i] = dn / m1
	}
}
