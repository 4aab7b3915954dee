package loop

import (
	"context"
	"testing"
)

// TestRunAllocsIndependentOfSlots: the slot loop allocates nothing, so a
// run four times longer (same users, batches and replications) makes no
// more allocations than the short one, apart from a few per generated
// block of slots (scheduling).
func TestRunAllocsIndependentOfSlots(t *testing.T) {
	if raceEnabled {
		t.Skip("the race detector changes allocation counts")
	}
	allocs := func(slots int64) float64 {
		sc := CanonicalScenario()
		sc.Groups[0].Count = 8
		sc.Run.Slots, sc.Run.WarmupSlots = slots, 500
		return testing.AllocsPerRun(2, func() {
			if _, err := Run(context.Background(), sc, RunOptions{}); err != nil {
				t.Fatal(err)
			}
		})
	}
	short, long := allocs(4000), allocs(16000)
	blocks := float64(16000-4000) / genBlockSlots
	t.Logf("allocations per run: %.0f at 4000 slots, %.0f at 16000 slots (%.0f more blocks)", short, long, blocks)
	if long-short > 2*blocks {
		t.Errorf("allocations grow with the run length: %.0f → %.0f", short, long)
	}
}
