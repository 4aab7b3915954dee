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
