package loop

import (
	"math"
	"testing"
)

// TestFoldRecordsTracksUsedRange: folding recorded fused slots counts every
// value in its bin and leaves each user's used bin range equal to the first
// and last non-zero bins found by a plain scan (the batch end scans only
// that range), for values inside, below and above the histograms' ranges.
func TestFoldRecordsTracksUsedRange(t *testing.T) {
	sc := CanonicalScenario()
	sc.Groups[0].Count = 4
	users, err := placeUsers(sc)
	if err != nil {
		t.Fatal(err)
	}
	sh := newShared(sc, users, nil)
	r := newTestRand(9)
	for trial := 0; trial < 50; trial++ {
		c := newCollector(sh)
		const stride = 16
		c.recStride = stride
		c.recRatio = make([]float64, 4*stride)
		c.recPow = make([]float64, 4*stride)
		for i := range c.recRatio {
			c.recRatio[i] = math.Pow(10, (200*r.Float64()-100)/10) // −100..100 dB: past both ends of the SIR-error range
			c.recPow[i] = math.Pow(10, (100*r.Float64()-70)/10)    // −70..30 dBm
		}
		c.recFrom, c.recTo = r.IntN(8), 8+r.IntN(9)
		c.foldRecords(0, 4)
		for u := 0; u < 4; u++ {
			for _, q := range []struct {
				name   string
				h      *quantityHists
				lo, hi int32
			}{{"sir", &c.sir, c.sir.lo[u], c.sir.hi[u]}, {"pow", &c.pow, c.pow.lo[u], c.pow.hi[u]}} {
				row := q.h.batch[u*q.h.stride : (u+1)*q.h.stride]
				wantLo, wantHi, total := -1, -1, 0
				for j, v := range row {
					if v != 0 {
						if wantLo < 0 {
							wantLo = j
						}
						wantHi = j
						total += int(v)
					}
				}
				if total != c.recTo-c.recFrom {
					t.Fatalf("trial %d user %d %s: %d counts, want %d", trial, u, q.name, total, c.recTo-c.recFrom)
				}
				if int(q.lo) != wantLo || int(q.hi) != wantHi {
					t.Fatalf("trial %d user %d %s: tracked range [%d, %d], scan [%d, %d]", trial, u, q.name, q.lo, q.hi, wantLo, wantHi)
				}
			}
		}
	}
}
