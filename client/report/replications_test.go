package report

import (
	"math"
	"strings"
	"testing"

	"golang.org/x/net/html"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// scenarioRow is the value of the scenario table's row for path ("" and
// false when there is none).
func scenarioRow(t *testing.T, page, path string) (string, bool) {
	t.Helper()
	doc, err := html.Parse(strings.NewReader(page))
	if err != nil {
		t.Fatal(err)
	}
	for _, tb := range sectionTables(doc, "scenario") {
		for _, r := range tb {
			if len(r) == 2 && r[0] == path {
				return r[1], true
			}
		}
	}
	return "", false
}

// TestSearchScenarioShowsReplicationsUsed: a capacity or tune page's
// scenario table shows in run.replications the replications the search
// ran (the request's, or the budget's for tune) and names the file's
// value as unused; it used to show the file's 4 while capacity ran 2. A
// sweep page keeps the scenario's own value (a sweep runs it).
func TestSearchScenarioShowsReplicationsUsed(t *testing.T) {
	base := func() *pb.Scenario {
		return &pb.Scenario{Name: "town", Groups: []*pb.UserGroup{{Name: "walkers", Count: 6}}, Run: &pb.RunSettings{Replications: 4}}
	}
	capRes := &pb.CapacityResult{Count: 20, TotalUsers: 20, PoleParams: &pb.PoleParams{Sectors: 1}}
	tuneIn := readFixture(t, "tune.json") // effort: at most 4 replications of one candidate
	for _, tc := range []struct {
		name string
		in   Input
		want string
	}{
		{"capacity, 2 asked", Input{Capacity: capRes, CapacityRequest: &pb.CapacityRequest{Base: base(), OutageLimit: 0.2, Replications: 2}},
			"2 per count; the scenario file's 4 is not used"},
		{"capacity, default", Input{Capacity: capRes, CapacityRequest: &pb.CapacityRequest{Base: base(), OutageLimit: 0.2}},
			"4 per count; the scenario file's 4 is not used"},
		{"tune, budget 2..8", Input{Tune: tuneIn.Tune, TuneRequest: &pb.TuneRequest{Base: base(), Budget: &pb.TuneBudget{MinReplications: 2, MaxReplications: 8}}},
			"2–4 per candidate (sequential: 2 first, at most 8); the scenario file's 4 is not used"},
		{"tune, default budget", Input{Tune: tuneIn.Tune, TuneRequest: &pb.TuneRequest{Base: base()}},
			"2–4 per candidate (sequential: 2 first, at most 32); the scenario file's 4 is not used"},
		{"sweep", Input{Sweep: &Sweep{Base: base(), Axes: []*pb.SweepAxis{{Path: "inner_loop.step_db", Values: []float64{1}}},
			Points: []*pb.SweepPoint{{Coordinates: []float64{1}, Report: &pb.RunReport{Aggregate: &pb.Figures{}}}}}}, "4"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got, ok := scenarioRow(t, render(t, tc.in), "run.replications")
			if !ok {
				t.Fatal("no run.replications row")
			}
			if got != tc.want {
				t.Errorf("run.replications %q, want %q", got, tc.want)
			}
		})
	}
	// A scenario that leaves it unset gets the row.
	b := base()
	b.Run = nil
	got, ok := scenarioRow(t, render(t, Input{Capacity: capRes, CapacityRequest: &pb.CapacityRequest{Base: b, OutageLimit: 0.2, Replications: 3}}), "run.replications")
	if !ok || got != "3 per count" {
		t.Errorf("unset in the file: row %q (present %v), want \"3 per count\"", got, ok)
	}
}

// TestSweepAxisHeadOnOneLine: the sweep table heads an axis column with
// its field path as typed, on one line (class "path": nowrap, monospace);
// it used to carry a zero-width space after each dot, which broke the path
// into "layout.handover." / "window_db" and was copied with it.
func TestSweepAxisHeadOnOneLine(t *testing.T) {
	const path = "layout.handover.window_db"
	rep := &pb.RunReport{NormalisedScenario: &pb.Scenario{Name: "t"},
		Aggregate: &pb.Figures{OutageProbability: &pb.Estimate{Value: 0.1, CiLow: 0.09, CiHigh: 0.11}}}
	page := render(t, Input{Sweep: &Sweep{Axes: []*pb.SweepAxis{{Path: path, Values: []float64{3}}},
		Points: []*pb.SweepPoint{{Coordinates: []float64{3}, Report: rep}}}})
	if strings.Contains(page, "\u200b") {
		t.Error("page has a zero-width space")
	}
	doc, err := html.Parse(strings.NewReader(page))
	if err != nil {
		t.Fatal(err)
	}
	found := false
	walk(doc, func(n *html.Node) {
		if n.Data != "th" || strings.TrimSpace(text(n)) != path {
			return
		}
		found = true
		class := ""
		for _, a := range n.Attr {
			if a.Key == "class" {
				class = a.Val
			}
		}
		if !strings.Contains(" "+class+" ", " path ") {
			t.Errorf("axis head %q has class %q, want one with \"path\"", path, class)
		}
	})
	if !found {
		t.Errorf("no table head %q", path)
	}
	if !strings.Contains(page, "th.path { white-space: nowrap;") {
		t.Error("style sheet does not keep th.path on one line")
	}
}

// TestSweepPageOneReplicationSubtitle: the layout figure of a sweep whose
// points ran one replication (no interval) says so under its title; with
// two replications and intervals it does not.
func TestSweepPageOneReplicationSubtitle(t *testing.T) {
	for _, reps := range []int32{1, 2} {
		var pts []*pb.SweepPoint
		for i, x := range []float64{0, 3, 6} {
			e := func(v float64) *pb.Estimate {
				if reps == 1 {
					return &pb.Estimate{Value: v, CiLow: math.NaN(), CiHigh: math.NaN()}
				}
				return &pb.Estimate{Value: v, CiLow: 0.9 * v, CiHigh: 1.1 * v}
			}
			rep := &pb.RunReport{Replications: reps, NormalisedScenario: &pb.Scenario{Name: "t", Layout: &pb.Layout{Sites: 7}},
				Aggregate: &pb.Figures{OutageProbability: e(0.1)},
				Layout:    &pb.LayoutReport{Overall: &pb.LayoutOverall{OtherToOwn: e(2 - 0.2*x), OutageProbability: e(0.1)}}}
			pts = append(pts, &pb.SweepPoint{Index: int64(i), Coordinates: []float64{x}, Report: rep})
		}
		page := render(t, Input{Sweep: &Sweep{Axes: []*pb.SweepAxis{{Path: "layout.handover.window_db", Values: []float64{0, 3, 6}}}, Points: pts}})
		has := strings.Contains(page, ">no intervals: 1 replication<")
		if has != (reps == 1) {
			t.Errorf("%d replication(s): subtitle \"no intervals: 1 replication\" present %v, want %v", reps, has, reps == 1)
		}
	}
}
