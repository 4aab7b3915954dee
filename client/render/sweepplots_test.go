package render

import (
	"math"
	"testing"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

func sweepPoint(i int64, step, rate, outage float64, infeasible bool) *pb.SweepPoint {
	return &pb.SweepPoint{Index: i, Coordinates: []float64{step, rate}, Report: &pb.RunReport{
		Aggregate:   &pb.Figures{OutageProbability: &pb.Estimate{Value: outage, CiLow: outage / 2, CiHigh: 2 * outage}, SirErrorStdDb: &pb.Estimate{Value: 1}},
		Feasibility: &pb.Feasibility{Infeasible: infeasible}}}
}

// TestSweepHeatGridFromRanges: axes given as ranges (no values; the server
// expands them) still give the grid, from the points' coordinates, in the
// figure's display scale, with infeasible points marked; the CLI's own
// copy of this conversion drew nothing for such axes.
func TestSweepHeatGridFromRanges(t *testing.T) {
	axes := []*pb.SweepAxis{{Path: StepPath, First: 0.5, Last: 2, Count: 2}, {Path: RatePath, First: 500, Last: 1500, Count: 2}}
	pts := []*pb.SweepPoint{sweepPoint(0, 0.5, 500, 0.02, false), sweepPoint(1, 2, 500, 0.04, false),
		sweepPoint(2, 0.5, 1500, 0.01, false), sweepPoint(3, 2, 1500, 0.5, true)}
	g, ok := SweepHeatGrid(axes, pts, "outage_probability", false)
	if !ok {
		t.Fatal("not ok")
	}
	if len(g.StepDB) != 2 || len(g.UpdateRateHz) != 2 || g.StepDB[1] != 2 || g.UpdateRateHz[1] != 1500 {
		t.Fatalf("grid axes %v × %v", g.StepDB, g.UpdateRateHz)
	}
	// outage in % (display scale 100).
	if math.Abs(g.Value[0][1]-4) > 1e-12 || math.Abs(g.Value[1][0]-1) > 1e-12 || !g.Infeasible[1][1] || g.Infeasible[0][0] {
		t.Errorf("values %v, infeasible %v", g.Value, g.Infeasible)
	}
	if g.Objective != "outage (%)" {
		t.Errorf("objective %q", g.Objective)
	}
	if _, ok := SweepHeatGrid(axes[:1], pts, "outage_probability", false); ok {
		t.Error("one axis must not give a heat map")
	}
	ls, ok := SweepStepLines(axes[:1], []*pb.SweepPoint{sweepPoint(0, 2, 0, 0.1, false), sweepPoint(1, 0.5, 0, 0.2, false)})
	if !ok || len(ls) != 1 || ls[0].Label != "all" || len(ls[0].StepDB) != 2 || ls[0].StepDB[0] != 0.5 {
		t.Errorf("step lines %+v", ls)
	}
}

// TestAutoSweepPlot: the automatic plot of a sweep from its axes; a
// multi-cell sweep, whose points have no SIR error percentiles, never gets
// the distribution plot ("layout" with one or two axes, none with more).
func TestAutoSweepPlot(t *testing.T) {
	ax := func(paths ...string) []*pb.SweepAxis {
		var out []*pb.SweepAxis
		for _, p := range paths {
			out = append(out, &pb.SweepAxis{Path: p})
		}
		return out
	}
	const win, delay = "layout.handover.window_db", "inner_loop.feedback_delay_slots"
	for _, tc := range []struct {
		axes   []*pb.SweepAxis
		layout bool
		want   string
	}{
		{ax(StepPath, RatePath), false, "heatmap"},
		{ax(StepPath, RatePath), true, "heatmap"},
		{ax(StepPath), false, "steps"},
		{ax(StepPath, win), true, "steps"},
		{ax(delay), false, "cdf"},
		{ax(win), true, "layout"},
		{ax(win, delay), true, "layout"},
		{ax(win, delay, "inner_loop.update_rate_hz"), true, ""},
	} {
		if got := AutoSweepPlot(tc.axes, tc.layout); got != tc.want {
			t.Errorf("axes %d (layout %v): %q, want %q", len(tc.axes), tc.layout, got, tc.want)
		}
	}
}

// TestSweepLayoutLines: f and outage (%) with their intervals against the
// first axis, one line per value of the second, in axis order; not for
// points without a layout or for three axes.
func TestSweepLayoutLines(t *testing.T) {
	pt := func(x, y, f, o float64) *pb.SweepPoint {
		return &pb.SweepPoint{Coordinates: []float64{x, y}, Report: &pb.RunReport{Layout: &pb.LayoutReport{Overall: &pb.LayoutOverall{
			OtherToOwn:        &pb.Estimate{Value: f, CiLow: f - 0.1, CiHigh: f + 0.1},
			OutageProbability: &pb.Estimate{Value: o, CiLow: o / 2, CiHigh: 2 * o}}}}}
	}
	axes := []*pb.SweepAxis{{Path: "layout.handover.window_db"}, {Path: StepPath}}
	pts := []*pb.SweepPoint{pt(0, 2, 0.9, 0.02), pt(0, 1, 0.8, 0.03), pt(6, 2, 0.6, 0.04), pt(6, 1, 0.5, 0.05)}
	ls, ok := SweepLayoutLines(axes, pts)
	if !ok || len(ls) != 2 {
		t.Fatalf("ok %v, %d lines", ok, len(ls))
	}
	// Lines in the order of the second axis' values: step 1 first.
	if l := ls[0]; len(l.X) != 2 || l.X[1] != 6 || l.F[0] != 0.8 || l.FHigh[1] != 0.6 || math.Abs(l.OutagePct[1]-5) > 1e-12 || math.Abs(l.OutageLow[0]-1.5) > 1e-12 {
		t.Errorf("first line %+v", l)
	}
	if _, ok := SweepLayoutLines(axes, []*pb.SweepPoint{sweepPoint(0, 1, 500, 0.1, false)}); ok {
		t.Error("a point without a layout gave lines")
	}
	if _, ok := SweepLayoutLines(append(axes, &pb.SweepAxis{Path: RatePath}), pts); ok {
		t.Error("three axes gave lines")
	}
}

// TestSweepNoIntervalReason: the reason a sweep's figure lacks intervals
// is "1 replication" only when every point ran one; otherwise none is
// claimed.
func TestSweepNoIntervalReason(t *testing.T) {
	pt := func(reps int32) *pb.SweepPoint { return &pb.SweepPoint{Report: &pb.RunReport{Replications: reps}} }
	for _, c := range []struct {
		pts  []*pb.SweepPoint
		want string
	}{
		{[]*pb.SweepPoint{pt(1), pt(1), pt(1)}, "1 replication"},
		{[]*pb.SweepPoint{pt(1), pt(2)}, ""},
		{[]*pb.SweepPoint{pt(4)}, ""},
		{nil, ""},
	} {
		if got := SweepNoIntervalReason(c.pts); got != c.want {
			t.Errorf("%d points: %q, want %q", len(c.pts), got, c.want)
		}
	}
}

// TestAxisValueLabelNamesTheGroup checks that a legend label of a per-group
// axis keeps its group: "30 km/h" alone reads as every user's speed
// when only groups[1].speeds[0] changed. The units are the proto field
// suffixes (_kmh km/h, _db dB, _m m).
func TestAxisValueLabelNamesTheGroup(t *testing.T) {
	for _, tc := range []struct {
		path string
		v    float64
		want string
	}{
		{"groups[1].speeds[0].speed_kmh", 30, "groups[1].speeds[0] 30 km/h"},
		{"groups[0].speeds[2].speed_kmh", 120, "groups[0].speeds[2] 120 km/h"},
		{"groups[0].distance_m", 300, "groups[0] distance 300 m"},
		{"inner_loop.step_db", 0.5, "step 0.5 dB"},
		{"layout.handover.window_db", 3, "window 3 dB"},
		{"speed_kmh", 60, "60 km/h"},
	} {
		if got := AxisValueLabel(tc.path, tc.v); got != tc.want {
			t.Errorf("AxisValueLabel(%q, %g) = %q, want %q", tc.path, tc.v, got, tc.want)
		}
	}
}
