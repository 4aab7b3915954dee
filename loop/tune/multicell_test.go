package tune

import (
	"context"
	"strings"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
)

// multiBase is a small multi-cell scenario: 7 omni sites with wrap-around,
// 4 users per cell at 30 km/h, 8 dB shadowing, outer loop off.
func multiBase() loop.Scenario {
	return loop.Scenario{
		Groups:    []loop.UserGroup{{Count: 4, Speeds: []loop.SpeedShare{{SpeedKmh: 30}}}},
		OuterLoop: loop.OuterLoop{InitialTargetDB: 5},
		Link:      loop.LinkCurve{ThresholdDB: 3},
		Run:       loop.RunSettings{Slots: 900, WarmupSlots: 300, Seed: 11},
		Layout: loop.Layout{Sites: 7, InterSiteDistanceM: 1000, WrapAround: true,
			Propagation: loop.LayoutPropagation{ShadowingDB: 8, SiteCorrelation: 0.5},
			Handover:    loop.Handover{MaxActive: 3, UpdateSlots: 150}},
	}
}

// TestMultiCellSweepAxes: sweep axes reach the layout (SetPath on
// layout.handover.window_db) and the inner loop of a multi-cell scenario,
// and every point runs on the multi-cell engine. Without hysteresis a
// 0 dB window keeps one cell (no soft handover at all), a 6 dB window puts
// a good share of users in soft handover (about a third of users within
// 6 dB of the second-best cell at 8 dB shadowing, common practice).
func TestMultiCellSweepAxes(t *testing.T) {
	g, err := NewGrid(multiBase(), []Axis{
		{Path: "layout.handover.window_db", Values: []float64{0, 6}},
		{Path: "inner_loop.step_db", Values: []float64{0.5, 2}},
	})
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range g.Points() {
		sc, err := p.ApplyTo(multiBase())
		if err != nil {
			t.Fatal(err)
		}
		w, _ := p.Value("layout.handover.window_db")
		if sc.Layout.Handover.WindowDB != w {
			t.Fatalf("%s: window %g not applied", p.Label(), sc.Layout.Handover.WindowDB)
		}
		rep, err := multicell.RunScenario(context.Background(), sc, loop.RunOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if rep.Layout == nil {
			t.Fatalf("%s: no layout section", p.Label())
		}
		sh := rep.Layout.Overall.SoftHandoverShare.Value
		switch {
		case w == 0 && sh != 0:
			t.Errorf("%s: soft handover share %g with a 0 dB window, want 0", p.Label(), sh)
		case w == 6 && !(sh > 0.1):
			t.Errorf("%s: soft handover share %g with a 6 dB window, want > 0.1", p.Label(), sh)
		}
		// tune's evaluator reads the same figures.
		s, err := runScenario(context.Background(), &sc)
		if err != nil {
			t.Fatal(err)
		}
		if s.OutageProbability != rep.Aggregate.OutageProbability.Value || s.NoiseRiseDB != rep.Layout.Overall.NoiseRiseDB.Value {
			t.Errorf("%s: tune sample %+v differs from the layout figures", p.Label(), s)
		}
	}
}

// TestMultiCellTune: the tuner runs multi-cell candidates; the effort
// counts every cell's users (7 cells × 4 users per run).
func TestMultiCellTune(t *testing.T) {
	base := multiBase()
	base.Run.Slots, base.Run.WarmupSlots = 600, 0
	req := Request{
		Base:       base,
		Axes:       []Axis{{Path: "inner_loop.step_db", Values: []float64{0.5, 1, 2}}},
		Objective:  Objective{Kind: ObjectiveMinSIRErrorStd},
		Conditions: []Condition{{Name: "30 km/h", Weight: 1}},
		Budget:     Budget{MinReplications: 2, MaxReplications: 3, BatchReplications: 1},
	}
	rec, err := Tune(context.Background(), req, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if len(rec.Candidates) != 3 {
		t.Fatalf("%d candidates", len(rec.Candidates))
	}
	per := int64(7 * 4 * 600)
	if rec.Effort.UserSlots == 0 || rec.Effort.UserSlots%per != 0 {
		t.Errorf("effort %d user-slots is not a multiple of 7 cells × 4 users × 600 slots", rec.Effort.UserSlots)
	}
	t.Log(rec.Overall.Headline)
}

// TestMultiCellCapacity: capacity in multi-cell mode is users per cell at
// the outage and noise-rise limits; direct runs on the same seeds confirm
// N passes and N+1 fails.
func TestMultiCellCapacity(t *testing.T) {
	base := multiBase()
	base.Run.Slots, base.Run.WarmupSlots = 600, 150
	base.OuterLoop.InitialTargetDB = 7    // a high target: the cells fill quickly
	base.Groups[0].Speeds[0].SpeedKmh = 3 // the 1 dB loop tracks 3 km/h: the noise rise binds
	req := CapacityRequest{Base: base, OutageLimit: 0.05, NoiseRiseLimitDB: 6, Replications: 2, MaxCount: 24}
	res, err := Capacity(context.Background(), req, Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Log(res.Headline)
	if res.BelowRange || res.AtRangeTop {
		t.Fatalf("capacity at the edge of the range: %s", res.Headline)
	}
	if len(res.LimitedBy) == 0 || res.LimitedBy[0] != FigureNoiseRise {
		t.Errorf("limited by %v, want the noise rise first", res.LimitedBy)
	}
	if !strings.Contains(res.Headline, "users per cell") {
		t.Errorf("headline %q does not say per cell", res.Headline)
	}
	pass := func(n int) bool {
		var out, nr float64
		for r := 0; r < 2; r++ {
			sc := base
			sc.Groups = append([]loop.UserGroup(nil), base.Groups...)
			sc.Groups[0].Count = n
			sc.Run.Seed = ReplicationSeed(base.Run.Seed, 0, r)
			rep, err := multicell.RunScenario(context.Background(), sc, loop.RunOptions{})
			if err != nil {
				t.Fatal(err)
			}
			out += rep.Aggregate.OutageProbability.Value / 2
			nr += rep.Layout.Overall.NoiseRiseDB.Value / 2
		}
		return out <= 0.05 && nr <= 6
	}
	if !pass(res.Count) {
		t.Errorf("direct runs at %d users per cell miss the limits", res.Count)
	}
	if !res.NonMonotone && pass(res.Count+1) {
		t.Errorf("direct runs at %d users per cell meet the limits", res.Count+1)
	}
}
