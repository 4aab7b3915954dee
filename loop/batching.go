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
// are used (at least MinBatches), and the report says so; with several
// replications the intervals come from the spread across replications and
// the batches only matter for a single replication.
const (
	BatchDecorrelationTimes = 10
	MinBatches              = 2
)

// decorrelationSlots is the longest decorrelation time of the run's users
// in slots (0 when every channel is static: f_D = 0 and no moving
// shadowing).
func decorrelationSlots(sc Scenario, users []userInfo, rateHz float64) float64 {
	worst := 0.0
	for _, u := range users {
		g := sc.Groups[u.group]
		if u.dopplerHz > 0 {
			worst = math.Max(worst, 0.4/u.dopplerHz*rateHz)
		}
		if g.ShadowingSigmaDB > 0 && u.speedKmh > 0 {
			worst = math.Max(worst, g.ShadowingDecorrelationM/(u.speedKmh/3.6)*rateHz)
		}
	}
	if ol := sc.OuterLoop; ol.Enabled && ol.BLERTarget > 0 {
		worst = math.Max(worst, float64(ol.BlockSlots)/ol.BLERTarget)
	}
	return worst
}

// effectiveBatches is the number of batches used for a run of measured
// slots: run.batches, reduced so that each batch spans at least
// BatchDecorrelationTimes decorrelation times, and never below MinBatches.
// note explains a reduction ("" when none).
func effectiveBatches(configured int, measured int64, decorrSlots float64) (k int, note string) {
	k = configured
	if decorrSlots <= 0 {
		return k, ""
	}
	fit := int(float64(measured) / (BatchDecorrelationTimes * decorrSlots))
	if fit >= k {
		return k, ""
	}
	k = max(fit, MinBatches)
	note = fmt.Sprintf("batch means use %d batches instead of %d so that each spans >= %d decorrelation times (%.0f slots) of the slowest user", k, configured, BatchDecorrelationTimes, decorrSlots)
	if fit < MinBatches {
		note += fmt.Sprintf("; the measured run spans only %.1f decorrelation times, so intervals from one replication are unreliable: lengthen the run or add replications", float64(measured)/decorrSlots)
	}
	return k, note
}
