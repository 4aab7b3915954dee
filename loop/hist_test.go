package loop

import "testing"

// TestUsedRange: usedRange finds the first and last non-zero bins, as a
// plain scan does, for occupancies at every position around the 8-bin
// steps.
func TestUsedRange(t *testing.T) {
	r := newTestRand(5)
	for n := 0; n < 40; n++ {
		for trial := 0; trial < 50; trial++ {
			c := make([]uint32, n)
			k := r.IntN(4)
			for i := 0; i < k && n > 0; i++ {
				c[r.IntN(n)] = uint32(1 + r.IntN(3))
			}
			wantLo, wantHi := 0, -1
			for i, v := range c {
				if v != 0 {
					if wantHi < 0 {
						wantLo = i
					}
					wantHi = i
				}
			}
			lo, hi := usedRange(c)
			if wantHi < 0 {
				if lo <= hi {
					t.Fatalf("n=%d %v: got [%d, %d], want empty", n, c, lo, hi)
				}
				continue
			}
			if lo != wantLo || hi != wantHi {
				t.Fatalf("n=%d %v: got [%d, %d], want [%d, %d]", n, c, lo, hi, wantLo, wantHi)
			}
		}
	}
}
