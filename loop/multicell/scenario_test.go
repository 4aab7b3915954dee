package multicell

import (
	"context"
	"math"
	"reflect"
	"strings"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
)

// multiScenario is a small 7-site, 3-sector scenario with a layout: the
// same model as smallLayout, written as a loop.Scenario.
func multiScenario() loop.Scenario {
	return loop.Scenario{
		Name: "seven sites",
		Groups: []loop.UserGroup{
			{Count: 2, Speeds: []loop.SpeedShare{{SpeedKmh: 30}}, Profile: "PEDA"},
			{Name: "cars", Count: 1, Speeds: []loop.SpeedShare{{SpeedKmh: 90}}},
		},
		InnerLoop: loop.InnerLoop{FeedbackDelaySlots: 1, CommandErrorProb: 0.04},
		Receiver:  loop.Receiver{SIREstimationErrorDB: 1, NoiseFigureDB: 5},
		OuterLoop: loop.OuterLoop{Enabled: true, InitialTargetDB: 6},
		Link:      loop.LinkCurve{ThresholdDB: 5},
		Run:       loop.RunSettings{Slots: 900, WarmupSlots: 300, Replications: 2, Seed: 3},
		Layout: loop.Layout{Sites: 7, SectorsPerSite: 3, InterSiteDistanceM: 800, WrapAround: true,
			Propagation: loop.LayoutPropagation{ShadowingDB: 8, SiteCorrelation: 0.5},
			Handover:    loop.Handover{WindowDB: 4, HysteresisDB: 1, MaxActive: 3, UpdateSlots: 150}},
	}
}

// TestRunScenarioMultiCell: a scenario with a layout runs on the
// multi-cell engine; the report's layout section is that engine's report
// for the converted Config, and the common figures are its layout-wide
// figures.
func TestRunScenarioMultiCell(t *testing.T) {
	ctx := context.Background()
	rep, err := RunScenario(ctx, multiScenario(), loop.RunOptions{})
	if err != nil {
		t.Fatal(err)
	}
	sc := multiScenario()
	sc.Normalise()
	cfg, vs := FromScenario(sc)
	if len(vs) > 0 {
		t.Fatal(vs)
	}
	want, err := Run(ctx, cfg)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Layout == nil || !reflect.DeepEqual(rep.Layout.Overall, want.Overall) || !reflect.DeepEqual(rep.Layout.Cells, want.Cells) {
		t.Fatal("layout section differs from multicell.Run of the converted config")
	}
	for _, c := range rep.Layout.Cells {
		// Noise rise I0/N0 ≥ 1: its interval stays at or above 0 dB.
		if c.NoiseRiseDB.CILow < 0 || c.OtherToOwn.CILow < 0 {
			t.Errorf("cell %s: interval below the range: noise rise %+v, f %+v", c.Name, c.NoiseRiseDB, c.OtherToOwn)
		}
	}
	if got := len(rep.Layout.Cells); got != 21 {
		t.Errorf("cells = %d, want 7 sites × 3 sectors = 21", got)
	}
	a, o := rep.Aggregate, rep.Layout.Overall
	if a.OutageProbability != o.OutageProbability || a.SIRErrorMeanDB != o.SIRErrorMeanDB || a.TxPowerMeanDBm != o.TxPowerMeanDBm ||
		a.MaxPowerFraction != o.TimeAtMaxPower || a.NoiseRiseMeanDB != o.NoiseRiseDB || a.AchievedBLER != o.AchievedBLER {
		t.Error("aggregate figures are not the layout-wide figures")
	}
	if a.Users != 21*3 || rep.NormalisedScenario.Users() != 21*3 {
		t.Errorf("users = %d (scenario %d), want 21 cells × 3 per cell", a.Users, rep.NormalisedScenario.Users())
	}
	if rep.NormalisedScenario.Layout.Handover.UpdateSlots != 150 || rep.NormalisedScenario.Layout.Propagation.PathLossExponent != loop.DefaultLayoutExponent {
		t.Errorf("normalised layout %+v", rep.NormalisedScenario.Layout)
	}
	// Outer loop on: BLER target error is achieved − target.
	if d := a.BLERTargetError.Value - (a.AchievedBLER.Value - 0.1); math.Abs(d) > 1e-12 {
		t.Errorf("bler_target_error off by %g", d)
	}
	if rep.SimulatedUserSlots != 63*900*2 {
		t.Errorf("simulated user-slots %d, want 63·900·2", rep.SimulatedUserSlots)
	}
}

// TestRunScenarioSingleCell: without a layout the dispatch is loop.Run.
func TestRunScenarioSingleCell(t *testing.T) {
	sc := loop.Scenario{
		Groups: []loop.UserGroup{{Count: 4, MaxDistanceM: 500, Speeds: []loop.SpeedShare{{SpeedKmh: 30}}}},
		Run:    loop.RunSettings{Slots: 600, Seed: 5},
	}
	got, err := RunScenario(context.Background(), sc, loop.RunOptions{})
	if err != nil {
		t.Fatal(err)
	}
	want, err := loop.Run(context.Background(), sc, loop.RunOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if got.Layout != nil || !reflect.DeepEqual(got.Aggregate, want.Aggregate) || got.EngineVersion != loop.EngineVersion {
		t.Fatal("single-cell scenario did not run as loop.Run")
	}
	// loop.Run refuses a layout: the dispatch point is multicell.RunScenario.
	if _, err := loop.Run(context.Background(), multiScenario(), loop.RunOptions{}); err == nil || !strings.Contains(err.Error(), "layout.sites") {
		t.Errorf("loop.Run on a layout: %v", err)
	}
}

// TestScenarioViolationPaths: every rule broken in multi-cell mode names
// the scenario's own field path.
func TestScenarioViolationPaths(t *testing.T) {
	cases := []struct {
		name  string
		edit  func(*loop.Scenario)
		field string
	}{
		{"window", func(s *loop.Scenario) { s.Layout.Handover.WindowDB = 30 }, "layout.handover.window_db"},
		{"shadowing", func(s *loop.Scenario) { s.Layout.Propagation.ShadowingDB = 25 }, "layout.propagation.shadowing_db"},
		{"distance", func(s *loop.Scenario) { s.Layout.InterSiteDistanceM = 10 }, "layout.inter_site_distance_m"},
		{"open loop", func(s *loop.Scenario) { s.Layout.OpenLoop.EstimationErrorDB = 40 }, "layout.open_loop.estimation_error_db"},
		{"count", func(s *loop.Scenario) { s.Groups[0].Count = 2000 }, "groups[0].count"},
		{"sites", func(s *loop.Scenario) { s.Layout.Sites = 5 }, "layout.sites"},
		{"other-cell ratio", func(s *loop.Scenario) { s.Receiver.OtherCellRatio = 0.5 }, "receiver.other_cell_ratio"},
		{"speeds", func(s *loop.Scenario) {
			s.Groups[1].Speeds = []loop.SpeedShare{{SpeedKmh: 3}, {SpeedKmh: 50}}
		}, "groups[1].speeds"},
		{"placement", func(s *loop.Scenario) { s.Groups[0].MaxDistanceM = 300 }, "groups[0].placement"},
		{"fixed power", func(s *loop.Scenario) { s.InnerLoop.Mode = loop.InnerModeFixedPower }, "inner_loop.mode"},
		{"table link", func(s *loop.Scenario) {
			s.Link.Kind = loop.LinkTable
			s.Link.Table = []loop.LinkPoint{{SIRDB: 0, BLER: 0.5}, {SIRDB: 5, BLER: 0.01}}
		}, "link.kind"},
		{"SIR estimation", func(s *loop.Scenario) { s.Receiver.SIREstimationErrorDB = 25 }, "receiver.sir_estimation_error_db"},
	}
	for _, c := range cases {
		sc := multiScenario()
		c.edit(&sc)
		_, err := RunScenario(context.Background(), sc, loop.RunOptions{})
		vs, ok := err.(loop.Violations)
		if !ok {
			t.Errorf("%s: error %v, want violations", c.name, err)
			continue
		}
		found := false
		for _, v := range vs {
			found = found || v.Field == c.field
		}
		if !found {
			t.Errorf("%s: violations %v do not name %s", c.name, vs, c.field)
		}
	}
}

// TestFingersAsSingleCell: the multi-cell legs use the same RAKE fingers
// as the single-cell engine for the same receiver (loop.FingerSetFor):
// VEHA (3GPP TS 25.101 annex B, six taps, 0–2510 ns (memory)) at
// 3.84 Mcps with max_fingers 2 keeps two fingers and loses power, the
// ideal receiver keeps every tap.
func TestFingersAsSingleCell(t *testing.T) {
	for _, rk := range []loop.RakeFingers{loop.RakeFingersChipResolved, loop.RakeFingersIdealEveryTap} {
		sc := multiScenario()
		sc.Groups[0].Profile = "VEHA"
		sc.Receiver.RakeFingers, sc.Receiver.MaxFingers = rk, 2
		sc.Normalise()
		cfg, vs := FromScenario(sc)
		if len(vs) > 0 {
			t.Fatal(vs)
		}
		fs, err := cfg.fingers(0)
		if err != nil {
			t.Fatal(err)
		}
		single := sc
		single.Layout = loop.Layout{}
		single.Groups = []loop.UserGroup{{Count: 1, MaxDistanceM: 300, Speeds: []loop.SpeedShare{{SpeedKmh: 30}}, Profile: "VEHA"}}
		single.Run = loop.RunSettings{Slots: 40}
		rep, err := loop.Run(context.Background(), single, loop.RunOptions{})
		if err != nil {
			t.Fatal(err)
		}
		gf := rep.GroupFingers[0]
		if len(fs.Profile.Taps) != gf.Fingers || math.Abs(10*math.Log10(fs.CapturedFraction)-gf.CapturedPowerDB) > 1e-12 {
			t.Errorf("%v: multi-cell %d fingers, %g captured; single cell %d fingers, %g dB", rk, len(fs.Profile.Taps), fs.CapturedFraction, gf.Fingers, gf.CapturedPowerDB)
		}
		wantFingers := 2
		if rk == loop.RakeFingersIdealEveryTap {
			wantFingers = 6
		}
		if gf.Fingers != wantFingers {
			t.Errorf("%v: %d fingers, want %d", rk, gf.Fingers, wantFingers)
		}
	}
}
