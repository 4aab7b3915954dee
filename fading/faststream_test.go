package fading

import (
	"math"
	"math/rand/v2"
	"sort"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestXoshiroReferenceOutputs: from state (0, 0, 0, 1) xoshiro256++ gives
// the outputs of the authors' reference C code (xoshiro256plusplus.c,
// Blackman & Vigna), as tabulated in the test data of the public
// DSCF-1224/xoshiro-fortran repository (test/README.md).
func TestXoshiroReferenceOutputs(t *testing.T) {
	g := FastStream{s3: 1}
	want := []uint64{
		0x0000000000800000, 0x0000000000800011, 0x0002200000800011, 0x0002200044000020,
		0x00022000448008A1, 0x01102100802208A0, 0x0114002284200880, 0x0402896644A64095,
		0x8A14A0A244ACC891, 0x8C88BA4680B20495,
	}
	for i, w := range want {
		if got := g.Uint64(); got != w {
			t.Fatalf("output %d: %#016x, want %#016x", i+1, got, w)
		}
	}
}

// TestFastStreamDistribution: normal draws from several streams against the
// standard normal: mean, variance and kurtosis within 5 standard errors
// (n = 2e6: SE 7.1e-4, 1.0e-3, 4.9e-3), tail probabilities P(X > x)
// against erfc(x/√2)/2 (Go's math.Erfc) within 5 binomial standard
// errors — x = 3.5 and 4 lie in the ziggurat's tail beyond 3.4426,
// x = 1 and 2 in its wedges — and a Kolmogorov–Smirnov test against
// gonum's distuv.UnitNormal CDF (n = 2e5: D < 1.95/√n, α = 0.001).
func TestFastStreamDistribution(t *testing.T) {
	const n = 2000000
	xs := make([]float64, 0, n)
	for s := 0; s < 4; s++ {
		g := NewFastStream(uint64(11+s), s, 2, StreamShadowing)
		for i := 0; i < n/4; i++ {
			xs = append(xs, g.Norm())
		}
	}
	var m1, m2, m4 float64
	for _, x := range xs {
		m1 += x
	}
	m1 /= n
	for _, x := range xs {
		d := (x - m1) * (x - m1)
		m2 += d
		m4 += d * d
	}
	m2 /= n
	kurt := m4 / n / (m2 * m2)
	for _, c := range []struct {
		name      string
		got, want float64
		se        float64
	}{
		{"mean", m1, 0, 1 / math.Sqrt(n)},
		{"variance", m2, 1, math.Sqrt(2.0 / n)},
		{"kurtosis", kurt, 3, math.Sqrt(24.0 / n)},
	} {
		if math.Abs(c.got-c.want) > 5*c.se {
			t.Errorf("%s %.5f, want %.1f ± %.5f (5 SE)", c.name, c.got, c.want, 5*c.se)
		}
	}
	for _, x := range []float64{1, 2, 3.5, 4} {
		p := math.Erfc(x/math.Sqrt2) / 2
		k := 0
		for _, v := range xs {
			if v > x {
				k++
			}
			if v < -x {
				k++
			}
		}
		got := float64(k) / (2 * n) // both tails, by symmetry
		if se := math.Sqrt(p * (1 - p) / (2 * n)); math.Abs(got-p) > 5*se {
			t.Errorf("P(X > %g) = %.3e, want %.3e ± %.1e (5 SE)", x, got, p, 5*se)
		}
	}
	ks := xs[:200000]
	sort.Float64s(ks)
	d := 0.0
	for i, x := range ks {
		f := distuv.UnitNormal.CDF(x)
		d = math.Max(d, math.Max(float64(i+1)/float64(len(ks))-f, f-float64(i)/float64(len(ks))))
	}
	if crit := 1.95 / math.Sqrt(float64(len(ks))); d > crit {
		t.Errorf("Kolmogorov–Smirnov D = %.5f > %.5f (α = 0.001)", d, crit)
	}
}

// TestFastStreamDeterministic: the same arguments give the same draws; a
// different user, index or kind gives another stream (draws uncorrelated:
// |r| < 5/√n).
func TestFastStreamDeterministic(t *testing.T) {
	const n = 20000
	draw := func(seed uint64, user, index int, kind StreamKind) []float64 {
		g := NewFastStream(seed, user, index, kind)
		out := make([]float64, n)
		for i := range out {
			out[i] = g.Norm()
		}
		return out
	}
	a := draw(7, 3, 0, StreamShadowing)
	b := draw(7, 3, 0, StreamShadowing)
	for i := range a {
		if a[i] != b[i] {
			t.Fatalf("draw %d differs between identical streams", i)
		}
	}
	for _, o := range [][]float64{draw(8, 3, 0, StreamShadowing), draw(7, 4, 0, StreamShadowing), draw(7, 3, 1, StreamShadowing), draw(7, 3, 0, StreamTap)} {
		r := 0.0
		for i := range a {
			r += a[i] * o[i]
		}
		if r /= n; math.Abs(r) > 5/math.Sqrt(n) {
			t.Errorf("correlation %.4f between different streams", r)
		}
	}
}

// TestNormFillMatchesNorm: NormFill gives the draws of repeated Norm calls
// (including the ziggurat's wedge and tail draws: 1e5 draws reach both).
func TestNormFillMatchesNorm(t *testing.T) {
	a, b := NewFastStream(3, 1, 4, StreamShadowing), NewFastStream(3, 1, 4, StreamShadowing)
	buf := make([]float64, 1000)
	for round := 0; round < 100; round++ {
		n := 1 + round*7%1000
		a.NormFill(buf[:n])
		for i, x := range buf[:n] {
			if y := b.Norm(); math.Float64bits(x) != math.Float64bits(y) {
				t.Fatalf("round %d draw %d: NormFill %v, Norm %v", round, i, x, y)
			}
		}
	}
}

func BenchmarkFastStream(b *testing.B) {
	g := NewFastStream(1, 0, 0, StreamShadowing)
	s := 0.0
	for i := 0; i < b.N; i++ {
		s += g.Norm()
	}
	sinkF = s
}

func BenchmarkNormFloat64PCG(b *testing.B) {
	r := rand.New(rand.NewPCG(1, 2))
	s := 0.0
	for i := 0; i < b.N; i++ {
		s += r.NormFloat64()
	}
	sinkF = s
}

var sinkF float64

// TestFastStreamUniform: Float64 lies in [0, 1) with mean 1/2 and variance
// 1/12 within 5 standard errors (n = 1e6: SE 2.9e-4 and 2.7e-4), and its
// decile counts pass a χ² test against equal counts (9 degrees of freedom,
// 0.999 quantile 27.88, gonum distuv.ChiSquared).
func TestFastStreamUniform(t *testing.T) {
	const n = 1000000
	g := NewFastStream(5, 1, 0, StreamTap)
	var m, m2 float64
	var bins [10]float64
	for i := 0; i < n; i++ {
		x := g.Float64()
		if x < 0 || x >= 1 {
			t.Fatalf("draw %d = %g, outside [0, 1)", i, x)
		}
		m += x
		m2 += x * x
		bins[int(x*10)]++
	}
	m /= n
	v := m2/n - m*m
	if math.Abs(m-0.5) > 5*math.Sqrt(1.0/12/n) {
		t.Errorf("mean %.5f, want 0.5", m)
	}
	if se := math.Sqrt((1.0/80 - 1.0/144) / n); math.Abs(v-1.0/12) > 5*se {
		t.Errorf("variance %.5f, want %.5f ± %.5f", v, 1.0/12, 5*se)
	}
	chi2 := 0.0
	for _, b := range bins {
		chi2 += (b - n/10) * (b - n/10) / (n / 10)
	}
	if crit := (distuv.ChiSquared{K: 9}).Quantile(0.999); chi2 > crit {
		t.Errorf("decile χ² = %.1f > %.1f", chi2, crit)
	}
}
