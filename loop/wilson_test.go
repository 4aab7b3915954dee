package loop

import (
	"math"
	"testing"
)

// TestWilsonInterval: the Wilson score interval (Wilson, J. Am. Stat.
// Assoc. 22, 1927) against its closed form at p = 0 and 1 — [0,
// z²/(n + z²)] and [n/(n + z²), 1] (Agresti & Coull, Am. Stat. 52, 1998,
// (memory)) — and against a worked value, and it always holds p inside
// [0, 1], also where rounding once left p = 0 out by 2.7e-20.
func TestWilsonInterval(t *testing.T) {
	z := z95
	for _, n := range []float64{1, 3, 7, 10, 33.3, 100, 1234.5, 1e4, 1e6, 7.7e8} {
		lo, hi := WilsonInterval(0, n, z)
		if lo != 0 || math.Abs(hi-z*z/(n+z*z)) > 1e-12*hi {
			t.Errorf("p = 0, n = %g: [%g, %g], want [0, %g]", n, lo, hi, z*z/(n+z*z))
		}
		lo, hi = WilsonInterval(1, n, z)
		if hi != 1 || math.Abs(lo-n/(n+z*z)) > 1e-12 {
			t.Errorf("p = 1, n = %g: [%g, %g], want [%g, 1]", n, lo, hi, n/(n+z*z))
		}
		for _, p := range []float64{0, 1e-9, 0.01, 0.5, 0.99, 1} {
			lo, hi := WilsonInterval(p, n, z)
			if !(0 <= lo && lo <= p && p <= hi && hi <= 1) {
				t.Errorf("p = %g, n = %g: [%g, %g] does not hold p inside [0, 1]", p, n, lo, hi)
			}
		}
	}
	// Worked value: 10 hits in 100 trials, z = 1.96: [0.0552, 0.1744]
	// (the Wilson interval as tabulated by Newcombe, Stat. Med. 17, 1998,
	// example (a) is 0.0552–0.1744 (memory)).
	lo, hi := WilsonInterval(0.1, 100, 1.96)
	if math.Abs(lo-0.0552) > 5e-5 || math.Abs(hi-0.1744) > 5e-5 {
		t.Errorf("10/100: [%.4f, %.4f], want [0.0552, 0.1744]", lo, hi)
	}
}
