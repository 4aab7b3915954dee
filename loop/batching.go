package loop

import (
	"fmt"
	"math"
)

// Batch length rule of the batch-means intervals: a batch spans at least
// BatchDecorrelationTimes decorrelation times of the slowest process of the
// run, so that batch means are close to independent and Student t over the
// batches holds its coverage (DEVELOPERS.md "How test tolerances are
// chosen"; common practice). The decorrelation time of a user is the larger
// of 0.4/f_D (the first zero of the Clarke autocorrelation J0(2π f_D τ) is
// at f_D τ = 0.3827; Clarke 1968, Jakes 1974) and, with shadowing, the time
// d_c/v to travel the shadowing decorrelation distance (Gudmundson 1991);
// with the outer loop on, the run's decorrelation time is at least the mean
// spacing of block errors at the target, block_slots/bler_target (the
// jump-rule target makes one up-step and walks back down over that time;
// common practice).
// When the measured run is too short for run.batches such batches, fewer
// are used (at least MinBatches), and the report says so. When even
// MinBatches such batches do not fit (fewer than
// MinBatches·BatchDecorrelationTimes decorrelation times measured), one
// replication gives no intervals at all: every estimate built on its batch
// means keeps its value and gets NaN bounds, and the report's note gives the
// measured slots needed (see withheldNote). With several replications the
// intervals come from the spread across replications and the batches only
// matter for a single replication. TestBatchMeansCoverageTwoBatches
// measures the coverage of exactly MinBatches such batches.
const (
	BatchDecorrelationTimes = 10
	MinBatches              = 2
)

// decorrelationSlots is the longest decorrelation time of the run's users
// in slots (0 when every channel is static: f_D = 0 and no moving
// shadowing), and what it is (for the report's notes).
func decorrelationSlots(sc Scenario, users []userInfo, rateHz float64) (worst float64, what string) {
	for i, u := range users {
		g := sc.Groups[u.group]
		if u.dopplerHz > 0 {
			if s := 0.4 / u.dopplerHz * rateHz; s > worst {
				worst, what = s, fmt.Sprintf("the fast fading of user %d at %g km/h (0.4/f_D = %s slots)", i, u.speedKmh, slotsText(s))
			}
		}
		if g.ShadowingSigmaDB > 0 && u.speedKmh > 0 {
			if s := g.ShadowingDecorrelationM / (u.speedKmh / 3.6) * rateHz; s > worst {
				worst, what = s, fmt.Sprintf("the shadowing of user %d at %g km/h (%g m / %.3g m/s = %s slots)", i, u.speedKmh, g.ShadowingDecorrelationM, u.speedKmh/3.6, slotsText(s))
			}
		}
	}
	if ol := sc.OuterLoop; ol.Enabled && ol.BLERTarget > 0 {
		if s := float64(ol.BlockSlots) / ol.BLERTarget; s > worst {
			worst, what = s, fmt.Sprintf("the outer loop (block_slots/bler_target = %s slots)", slotsText(s))
		}
	}
	return worst, what
}

// slotsText is a decorrelation time in slots for the notes: one decimal
// below 100 slots (so that 20 of them match the slots needed), whole above.
func slotsText(s float64) string {
	if s < 100 {
		return fmt.Sprintf("%.1f", s)
	}
	return fmt.Sprintf("%.0f", s)
}

// effectiveBatches is the number of batches used for a run of measured
// slots: run.batches, reduced so that each batch spans at least
// BatchDecorrelationTimes decorrelation times, and never below MinBatches.
// note explains a reduction ("" when none). withhold is set when even
// MinBatches such batches do not fit (measured < minSlotsForIntervals):
// one replication's intervals are then withheld and note says why and
// what run length would give them.
func effectiveBatches(configured int, measured int64, decorrSlots float64, what string) (k int, note string, withhold bool) {
	k = configured
	if decorrSlots <= 0 {
		return k, "", false
	}
	if need := minSlotsForIntervals(decorrSlots); measured < need {
		return min(k, MinBatches), withheldNote(measured, need, decorrSlots, what), true
	}
	fit := int(float64(measured) / (BatchDecorrelationTimes * decorrSlots))
	if fit >= k {
		return k, "", false
	}
	k = max(fit, MinBatches)
	note = fmt.Sprintf("batch means use %d batches instead of %d so that each spans >= %d decorrelation times (%.0f slots) of the slowest user", k, configured, BatchDecorrelationTimes, decorrSlots)
	return k, note, false
}

// minSlotsForIntervals is the shortest measured run (slots) that holds
// MinBatches batches of BatchDecorrelationTimes decorrelation times of
// decorrSlots slots each: ceil(MinBatches·BatchDecorrelationTimes·decorrSlots),
// the product taken as exact within 1e-9 relative (decorrSlots is itself
// a rounded quotient: 720000.0000001 is 720 000 slots, not 720 001).
func minSlotsForIntervals(decorrSlots float64) int64 {
	n := MinBatches * BatchDecorrelationTimes * decorrSlots
	return int64(math.Ceil(n - 1e-9*n))
}

// withheldNote is the report's note of a one-replication run too short for
// MinBatches batches: measured slots against the need slots.
func withheldNote(measured, need int64, decorrSlots float64, what string) string {
	return fmt.Sprintf("one replication: no intervals (bounds not available): the %d measured slots span %.2g decorrelation times of the slowest process; intervals from batch means over time need at least %d measured slots (%d batches of %d decorrelation times of %s); run 2 or more replications (intervals over independent runs) or lengthen the run",
		measured, float64(measured)/decorrSlots, need, MinBatches, BatchDecorrelationTimes, what)
}
