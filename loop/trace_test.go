package loop

import (
	"context"
	"testing"
)

// TestTraceDecimation checks the engine's decimation rule against its
// definition, max(1, ⌊slots / samples⌋) capped at MaxTraceDecimation, on
// worked cases.
func TestTraceDecimation(t *testing.T) {
	for _, tc := range []struct {
		slots   int64
		samples int
		want    int
	}{
		{15000, 1500, 10},  // README default run: 10 s at 1500 Hz
		{9000, 1500, 6},    // near_far_stress.yaml: 6 s at 1500 Hz
		{16500, 1500, 11},  // floor, not round
		{1000, 1500, 1},    // fewer slots than samples: every slot
		{0, 1500, 1},       // no slots: 1, never 0
		{1 << 40, 10, 1e6}, // capped
		{15000, 0, 1},      // no samples asked
	} {
		if got := TraceDecimation(tc.slots, tc.samples); got != tc.want {
			t.Errorf("TraceDecimation(%d, %d) = %d, want %d", tc.slots, tc.samples, got, tc.want)
		}
	}
	// An explicit decimation wins over samples per user.
	if d := (TraceOptions{Decimation: 7, SamplesPerUser: 1500}).DecimationFor(15000); d != 7 {
		t.Errorf("explicit decimation: got %d, want 7", d)
	}
	if d := (TraceOptions{}).DecimationFor(15000); d != 1 {
		t.Errorf("no decimation, no samples: got %d, want 1", d)
	}
}

// TestTraceSamplesPerUser: a run asked for about n samples per user
// samples every TraceDecimation(total, n)-th slot, ⌈total/d⌉ samples
// (all users of baseScenario are always active).
func TestTraceSamplesPerUser(t *testing.T) {
	sc := baseScenario(4, 3000)
	rep := mustRun(t, sc, nil, RunOptions{Trace: TraceOptions{Users: []int{0, 3}, SamplesPerUser: 400}})
	d := int64(TraceDecimation(sc.TotalSlots(), 400)) // 3000/400 → 7
	if d != 7 {
		t.Fatalf("decimation %d, want 7", d)
	}
	want := int((sc.TotalSlots() + d - 1) / d)
	for _, tr := range rep.Traces {
		if len(tr.Slots) != want || tr.Slots[1]-tr.Slots[0] != d {
			t.Errorf("user %d: %d samples %d apart, want %d samples %d apart", tr.User, len(tr.Slots), tr.Slots[1]-tr.Slots[0], want, d)
		}
	}
	_, err := Run(context.Background(), sc, RunOptions{Trace: TraceOptions{Users: []int{0}, SamplesPerUser: -1}})
	if v, ok := err.(Violations); !ok || !hasField(v, "trace.samples_per_user") {
		t.Errorf("negative samples per user: %v", err)
	}
}
