package loop

import (
	"math"
	"testing"
)

// TestMinSlotsForIntervals: the shortest run for intervals from batch
// means is MinBatches·BatchDecorrelationTimes decorrelation times, rounded
// up to whole slots, with a decorrelation time that is itself a rounded
// quotient counted as the exact value it stands for.
func TestMinSlotsForIntervals(t *testing.T) {
	per := float64(MinBatches * BatchDecorrelationTimes)
	for _, c := range []struct {
		decorrSlots float64
		want        int64
	}{
		{36000, int64(36000 * per)},
		{math.Nextafter(36000, 37000), int64(36000 * per)}, // one ulp above: the same slots
		{36000.5, int64(36000.5 * per)},
		{0.4 / 55.6 * 1500, int64(math.Ceil(0.4 / 55.6 * 1500 * per))},
		{10.01, int64(math.Ceil(10.01 * per))},
	} {
		if got := minSlotsForIntervals(c.decorrSlots); got != c.want {
			t.Errorf("minSlotsForIntervals(%v) = %d, want %d", c.decorrSlots, got, c.want)
		}
	}
}
