package tune

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"strings"
	"sync"
	"testing"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
)

// TestPointSeedRule: a common-seed point runs with the base seed, a
// per-point one with fading.SplitMix64(seed, index) (checked against the
// reference generator in package fading).
func TestPointSeedRule(t *testing.T) {
	if PointSeed(7, 3, SeedModeCommon) != 7 {
		t.Error("a common-seed point does not run with the base seed")
	}
	if PointSeed(7, 3, SeedModePerPoint) != fading.SplitMix64(7, 3) {
		t.Error("a per-point seed is not SplitMix64(seed, index)")
	}
}

// tinySweepBase is the canonical scenario cut to 2 users of one group and
// 300 slots: milliseconds per point.
func tinySweepBase() loop.Scenario {
	sc := loop.CanonicalScenario()
	sc.Groups = sc.Groups[:1]
	sc.Groups[0].Count = 2
	sc.Groups[0].Placement = loop.PlacementUniformArea
	sc.Groups[0].DistancesM = nil
	sc.Run.Slots, sc.Run.WarmupSlots, sc.Run.Replications = 300, 0, 1
	return sc
}

func TestRunPointMatchesSweep(t *testing.T) {
	base := tinySweepBase()
	axes := []Axis{
		{Path: "inner_loop.step_db", Values: []float64{0.5, 1}},
		{Path: "inner_loop.command", Names: []string{"COMMAND_FIXED_STEP", "COMMAND_ADAPTIVE"}},
		{Path: "groups[0].speed_kmh", Values: []float64{3, 120}},
	}
	plan, err := PlanSweep(SweepRequest{Base: base, Axes: axes, SeedMode: SeedModePerPoint})
	if err != nil {
		t.Fatal(err)
	}
	if plan.Points() != 8 {
		t.Fatalf("%d points, want 8", plan.Points())
	}
	var mu sync.Mutex
	got := map[int64]*SweepPoint{}
	sum, err := Sweep(context.Background(), plan, SweepOptions{Parallelism: 2, Check: true}, func(p *SweepPoint) error {
		mu.Lock()
		defer mu.Unlock()
		got[p.Index] = p
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if sum.PointsComputed != 8 || len(got) != 8 {
		t.Fatalf("computed %d points, got %d", sum.PointsComputed, len(got))
	}
	for _, idx := range []int64{0, 5, 7} {
		one, err := RunPoint(context.Background(), base, axes, idx, SeedModePerPoint)
		if err != nil {
			t.Fatal(err)
		}
		a, b := *one.Report, *got[idx].Report
		a.WallTimeS, a.UserSlotsPerS, b.WallTimeS, b.UserSlotsPerS = 0, 0, 0, 0
		// Compared as JSON (exact floats, NaN as null): a one-replication
		// point this short has its intervals withheld (NaN bounds), and
		// NaN != NaN under reflect.DeepEqual.
		ja, errA := json.Marshal(a)
		jb, errB := json.Marshal(b)
		if errA != nil || errB != nil {
			t.Fatalf("point %d: report does not marshal: %v %v", idx, errA, errB)
		}
		if !bytes.Equal(ja, jb) || one.Seed != got[idx].Seed {
			t.Errorf("point %d: RunPoint and Sweep disagree", idx)
		}
	}
	// Point 7 is the last of every axis: step 1, ADAPTIVE, 120 km/h on
	// every speed of group 0.
	p := got[7]
	if l := p.Point.Label(); l != "step_db=1, command=COMMAND_ADAPTIVE, groups[0].speed_kmh (every speed)=120" {
		t.Errorf("label %q", l)
	}
	ns := p.Report.NormalisedScenario
	if ns.InnerLoop.Command != loop.CommandAdaptive || ns.InnerLoop.StepDB != 1 {
		t.Errorf("point 7 ran command %v step %g", ns.InnerLoop.Command, ns.InnerLoop.StepDB)
	}
	for _, s := range ns.Groups[0].Speeds {
		if s.SpeedKmh != 120 {
			t.Errorf("point 7 speeds %+v, want every speed 120", ns.Groups[0].Speeds)
		}
	}
	if p.Seed != fading.SplitMix64(base.Run.Seed, 7) {
		t.Errorf("point 7 seed %d, want SplitMix64(seed, 7)", p.Seed)
	}
}

// TestSweepStopsAfterCancel cancels a sweep from its first point's
// callback and counts the work after the cancel: no point may be handed
// over after it, and no point started after it (points computed ≤ the
// points already running, one per worker).
func TestSweepStopsAfterCancel(t *testing.T) {
	base := tinySweepBase()
	vals := make([]float64, 64)
	for i := range vals {
		vals[i] = 0.1 + 0.1*float64(i)
	}
	plan, err := PlanSweep(SweepRequest{Base: base, Axes: []Axis{{Path: "inner_loop.step_db", Values: vals}}, SeedMode: SeedModeCommon})
	if err != nil {
		t.Fatal(err)
	}
	for _, par := range []int{1, 2} {
		ctx, cancel := context.WithCancel(context.Background())
		var after int
		cancelled := false
		sum, err := Sweep(ctx, plan, SweepOptions{Parallelism: par}, func(p *SweepPoint) error {
			if cancelled {
				after++
			}
			cancelled = true
			cancel()
			return nil
		})
		cancel()
		if !errors.Is(err, context.Canceled) {
			t.Errorf("parallelism %d: err %v, want context.Canceled", par, err)
		}
		if after != 0 || sum.PointsComputed != 1 {
			t.Errorf("parallelism %d: %d points handed over after the cancel, %d computed; want 0 and 1", par, after, sum.PointsComputed)
		}
		// The cancel came with the first point handed over; by then at
		// most one point per worker had started.
		if sum.PointsStarted > int64(par) {
			t.Errorf("parallelism %d: %d points started, want <= %d (none after the cancel)", par, sum.PointsStarted, par)
		}
	}
}

func TestPlanSweepChecksWithoutExpansion(t *testing.T) {
	base := tinySweepBase()
	big := make([]float64, MaxAxisValues)
	for i := range big {
		big[i] = 1 + float64(i)
	}
	tests := []struct {
		name  string
		req   SweepRequest
		field string
	}{
		{"too many points", SweepRequest{Base: base, SeedMode: SeedModeCommon, Axes: []Axis{
			{Path: "inner_loop.update_rate_hz", Values: big}, {Path: "receiver.noise_figure_db", First: 0, Last: 10, Count: 1000}}}, "axes"},
		{"value breaks the base", SweepRequest{Base: base, SeedMode: SeedModeCommon, Axes: []Axis{
			{Path: "inner_loop.step_db", Values: []float64{1, 50}}}}, "axes[0].values[1]"},
		{"unknown enum name", SweepRequest{Base: base, SeedMode: SeedModeCommon, Axes: []Axis{
			{Path: "inner_loop.command", Names: []string{"COMMAND_FIXED_STEP", "COMMAND_NOPE"}}}}, "axes[0].names[1]"},
		{"index past the grid", SweepRequest{Base: base, SeedMode: SeedModeCommon, Indices: []int64{2},
			Axes: []Axis{{Path: "inner_loop.step_db", Values: []float64{1, 2}}}}, "point_indices[0]"},
		{"no seed mode", SweepRequest{Base: base, Axes: []Axis{{Path: "inner_loop.step_db", Values: []float64{1}}}}, "seed_mode"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := PlanSweep(tc.req)
			var v loop.Violations
			if !errors.As(err, &v) {
				t.Fatalf("err %v, want violations", err)
			}
			found := false
			for _, x := range v {
				found = found || x.Field == tc.field
			}
			if !found {
				t.Errorf("violations %v do not name %s", v, tc.field)
			}
		})
	}
}

// TestSweepCostBoundsEveryPoint checks that the plan's cost bounds the sum
// of the points' costs (computed here by expanding a small grid) plus the
// per-run overhead, with axes that raise and lower the cost.
func TestSweepCostBoundsEveryPoint(t *testing.T) {
	base := tinySweepBase()
	axes := []Axis{
		{Path: "groups[0].count", Values: []float64{3, 1, 2}},
		{Path: "run.slots", Values: []float64{200, 600}},
		{Path: "groups[0].profile", Names: []string{"FLAT", "EVA", "EPA"}},
		{Path: "inner_loop.step_db", Values: []float64{0.5, 2}},
	}
	plan, err := PlanSweep(SweepRequest{Base: base, Axes: axes, SeedMode: SeedModeCommon})
	if err != nil {
		t.Fatal(err)
	}
	var sum, worst int64
	for i := range plan.Points() {
		sc, err := plan.scenario(int64(i))
		if err != nil {
			t.Fatal(err)
		}
		sum += sc.Cost() + RunOverheadTapSlots
		worst = max(worst, sc.Cost())
	}
	c := plan.Cost()
	if c.TapSlots < sum {
		t.Errorf("plan cost %d below the points' total %d", c.TapSlots, sum)
	}
	// The bound is the heaviest point times the point count: exact here,
	// since the heaviest combination (3 users, 600 slots, EVA) is a point.
	if want := int64(plan.Points()) * (worst + RunOverheadTapSlots); c.TapSlots != want {
		t.Errorf("plan cost %d, want %d", c.TapSlots, want)
	}
}

func TestTuneCostWithoutExpansion(t *testing.T) {
	req := Request{Base: tinySweepBase(),
		Axes:      []Axis{{Path: "inner_loop.step_db", First: 0.01, Last: 10, Count: 1000}, {Path: "inner_loop.update_rate_hz", First: 500, Last: 1500, Count: 100}},
		Objective: Objective{Kind: ObjectiveMinSIRErrorStd},
		Budget:    Budget{MinReplications: 2, MaxReplications: 2},
		Conditions: []Condition{{Name: "a", Weight: 1}, {Name: "b", Weight: 1}, {Name: "c", Weight: 1},
			{Name: "d", Weight: 1}, {Name: "e", Weight: 1}},
	}
	var c Cost
	var err error
	allocs := testing.AllocsPerRun(1, func() { c, err = TuneCost(req) })
	if err != nil {
		t.Fatal(err)
	}
	if c.Points != 100000 || c.Runs != (100000+1)*5*2 {
		t.Errorf("cost %+v, want 100000 points and 1000010 runs", c)
	}
	// One probe per axis value (1100) and per condition, a few allocations
	// each; expanding 100000 × 5 scenarios took millions.
	if allocs > 100000 {
		t.Errorf("TuneCost made %.0f allocations, want far fewer than one per candidate", allocs)
	}
	t.Logf("TuneCost of 100000 candidates × 5 conditions: %.0f allocations", allocs)
	_, err = TuneCost(Request{Base: tinySweepBase(), Axes: []Axis{{Path: "inner_loop.no_such", Values: []float64{1}}}})
	if err == nil || !strings.Contains(err.Error(), "axes[0].path") {
		t.Errorf("bad path: err %v", err)
	}
}

// TestSweepCheckStopsOnCancel: the per-point check that runs after
// admission stops under a cancelled context before building the points.
func TestSweepCheckStopsOnCancel(t *testing.T) {
	plan, err := PlanSweep(SweepRequest{Base: tinySweepBase(), SeedMode: SeedModeCommon, Axes: []Axis{
		{Path: "inner_loop.step_db", First: 0.1, Last: 5, Count: 1000}, {Path: "receiver.noise_figure_db", First: 0, Last: 9, Count: 100}}})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if err := plan.Check(ctx); !errors.Is(err, context.Canceled) {
		t.Errorf("Check on a cancelled context: %v, want context.Canceled", err)
	}
	sum, err := Sweep(ctx, plan, SweepOptions{Check: true}, func(*SweepPoint) error { t.Error("a point ran"); return nil })
	if !errors.Is(err, context.Canceled) || sum.PointsStarted != 0 {
		t.Errorf("Sweep on a cancelled context: %v, %d points started", err, sum.PointsStarted)
	}
}
