package multicell

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestLinToDB: linToDB agrees with 10·math.Log10 (Go's math library as the
// reference) within its stated interpolation bound of 5.2e-7 dB over 1e-30
// … 1e30, at exact powers of two and at the special values.
func TestLinToDB(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	worst := 0.0
	for i := 0; i < 200000; i++ {
		x := math.Pow(10, -30+60*r.Float64())
		worst = math.Max(worst, math.Abs(linToDB(x)-10*math.Log10(x)))
	}
	for e := -100; e <= 100; e++ {
		x := math.Ldexp(1, e)
		worst = math.Max(worst, math.Abs(linToDB(x)-10*math.Log10(x)))
	}
	if worst > 5.2e-7 {
		t.Errorf("largest error %.3g dB, bound 5.2e-7 dB", worst)
	}
	if worst == 0 {
		t.Errorf("no error at all: the check did not compare the table")
	}
	for _, x := range []float64{0, -1, math.Inf(1), math.SmallestNonzeroFloat64} {
		got, want := linToDB(x), 10*math.Log10(x)
		if !(got == want || math.IsNaN(got) && math.IsNaN(want)) {
			t.Errorf("linToDB(%g) = %g, want %g", x, got, want)
		}
	}
}

// TestLinFromDB: linFromDB agrees with math.Pow(10, x/10) (Go's math
// library as the reference) within its stated relative bound of 5.8e-8
// over −300 … +300 dB, at whole dB values and at the fallback range.
func TestLinFromDB(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	worst := 0.0
	check := func(x float64) {
		want := math.Pow(10, x/10)
		worst = math.Max(worst, math.Abs(linFromDB(x)-want)/want)
	}
	for i := 0; i < 200000; i++ {
		check(-300 + 600*r.Float64())
	}
	for x := -300.0; x <= 300; x++ {
		check(x)
	}
	if worst > 5.8e-8 {
		t.Errorf("largest relative error %.3g, bound 5.8e-8", worst)
	}
	if worst == 0 {
		t.Errorf("no error at all: the check did not compare the table")
	}
	if got := linFromDB(-4000); got != dbToLin(-4000) {
		t.Errorf("linFromDB(-4000) = %g, want dbToLin's %g", got, dbToLin(-4000))
	}
}

// TestLinFromDBInPlace: the batch conversion gives linFromDB's bits, inside
// and outside the table's range and for NaN.
func TestLinFromDBInPlace(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	xs := []float64{-4000, 4000, math.NaN(), math.Inf(-1), 0, -2999.9, 2999.9}
	for i := 0; i < 10000; i++ {
		xs = append(xs, -400+800*r.Float64())
	}
	got := append([]float64(nil), xs...)
	linFromDBInPlace(got)
	for i, x := range xs {
		want := linFromDB(x)
		if math.Float64bits(got[i]) != math.Float64bits(want) && !(math.IsNaN(got[i]) && math.IsNaN(want)) {
			t.Fatalf("x = %v: %v, linFromDB %v", x, got[i], want)
		}
	}
}

// TestLinToDBFloorTo: the batch conversion gives linToDB(max(x, floor))'s
// bits, including below the floor, at zero and for subnormal, infinite and
// NaN values.
func TestLinToDBFloorTo(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	xs := []float64{0, 1e-40, 1e-30, math.SmallestNonzeroFloat64, math.Inf(1), math.NaN(), 1, 2, 0.5}
	for i := 0; i < 10000; i++ {
		xs = append(xs, math.Pow(10, -35+70*r.Float64()))
	}
	got := make([]float64, len(xs))
	linToDBFloorTo(got, xs, 1e-30)
	for i, x := range xs {
		want := linToDB(math.Max(x, 1e-30))
		if math.Float64bits(got[i]) != math.Float64bits(want) && !(math.IsNaN(got[i]) && math.IsNaN(want)) {
			t.Fatalf("x = %v: %v, linToDB %v", x, got[i], want)
		}
	}
}

// TestDBConvAVX2MatchesGo: the AVX2 conversions give the same bits as the
// Go loops for every length up to 41 (groups of four and the rest) and for
// values the AVX2 loop must hand back (zero, negative, subnormal,
// infinite, NaN, beyond ±3000 dB), mixed among ordinary ones, with and
// without a floor.
func TestDBConvAVX2MatchesGo(t *testing.T) {
	if !useAVX2 {
		t.Skip("no AVX2 on this machine: only the Go loops run")
	}
	r := rand.New(rand.NewPCG(9, 10))
	special := []float64{0, math.Copysign(0, -1), -1, 5e-324, math.Inf(1), math.Inf(-1), math.NaN(), 1e-30, 1, 2, 3000, -3000, 2999.999, -2999.999, 1e300}
	same := func(a, b float64) bool {
		return math.Float64bits(a) == math.Float64bits(b) || math.IsNaN(a) && math.IsNaN(b)
	}
	for n := 0; n <= 41; n++ {
		for trial := 0; trial < 30; trial++ {
			lin, db := make([]float64, n), make([]float64, n)
			for i := range lin {
				lin[i] = math.Exp(r.NormFloat64() * 20)
				db[i] = r.NormFloat64() * 60
				if trial%3 == 0 && r.IntN(6) == 0 {
					lin[i] = special[r.IntN(len(special))]
					db[i] = special[r.IntN(len(special))]
				}
			}
			for _, floor := range []float64{0, 1e-30} {
				got, want := make([]float64, n), make([]float64, n)
				linToDBFloorTo(got, lin, floor)
				useAVX2 = false
				linToDBFloorTo(want, lin, floor)
				useAVX2 = true
				for i := range got {
					if !same(got[i], want[i]) {
						t.Fatalf("linToDB n=%d floor %g: %v -> AVX2 %v, Go %v", n, floor, lin[i], got[i], want[i])
					}
				}
			}
			got, want := append([]float64(nil), db...), append([]float64(nil), db...)
			linFromDBInPlace(got)
			useAVX2 = false
			linFromDBInPlace(want)
			useAVX2 = true
			for i := range got {
				if !same(got[i], want[i]) {
					t.Fatalf("linFromDB n=%d: %v -> AVX2 %v, Go %v", n, db[i], got[i], want[i])
				}
			}
		}
	}
}
