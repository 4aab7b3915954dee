package report

import (
	"strings"
	"testing"

	"golang.org/x/net/html"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// The capacity page of a layout search says users per cell with the
// layout's total (7 sites × 3 sectors = 21 cells), never "users in all",
// gives the pole's measured f with one sector per cell, says feasibility
// is not computed, turns the verdict to a warning when the reason cautions
// that a limit is not separated, and records the replications used and
// the engine version given; a single-cell page keeps "users in all".
func TestCapacityPageLayout(t *testing.T) {
	est := func(m, lo, hi float64) *pb.ReplicationEstimate {
		return &pb.ReplicationEstimate{Mean: m, Low: lo, High: hi, N: 2}
	}
	for _, tc := range []struct {
		name    string
		layout  bool
		reason  string
		want    []string
		notWant []string
		class   string
	}{
		{"single cell", false, "Up to 23 users meet the limits.",
			[]string{"20 in the group, 23 users in all", "f = 0, 1 sector", "2 per count", "fadeloop-loop/9.9.9"},
			[]string{"per cell", "not computed in multi-cell"}, "ok"},
		{"layout", true, "Up to 23 users per cell meet the limits. Caution: at 23 users per cell the noise rise 5.74 [3.19, 8.29] dB is not separated from the 6.00 dB limit.",
			[]string{"20 in the group, 23 users per cell (483 in the layout's 21 cells)", "f = 1.65 measured in the layout at the capacity count, 1 sector per cell",
				"Feasibility is not computed in multi-cell mode", "users per cell", "2 per count", "fadeloop-loop/9.9.9"},
			[]string{"users in all", "1.6504"}, "warn"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			base := &pb.Scenario{Name: "town", Groups: []*pb.UserGroup{{Name: "walkers", Count: 6}}}
			pp := &pb.PoleParams{ChipRateHz: 3.84e6, BitRateBps: 12.2e3, EbI0Db: 5, ActivityFactor: 1, Sectors: 1}
			if tc.layout {
				base.Layout = &pb.Layout{Sites: 7, SectorsPerSite: 3}
				pp.OtherCellRatio = 1.6504449665742578
			}
			res := &pb.CapacityResult{Count: 20, TotalUsers: 23, Pole: 37.6, ModelPole: 37.9, PoleParams: pp, Reason: tc.reason,
				Evaluated: []*pb.CapacityPoint{{Count: 20, TotalUsers: 23, Pass: true,
					Figures: &pb.TuneFigures{OutageProbability: est(0.07, 0.06, 0.08), NoiseRiseMeanDb: est(5.7, 3.2, 8.3)}}}}
			req := &pb.CapacityRequest{Base: base, OutageLimit: 0.2, Replications: 2}
			page := render(t, Input{Capacity: res, CapacityRequest: req, EngineVersion: "fadeloop-loop/9.9.9", Source: "test"})
			doc, err := html.Parse(strings.NewReader(page))
			if err != nil {
				t.Fatal(err)
			}
			body := text(doc)
			for _, s := range tc.want {
				if !strings.Contains(body, s) {
					t.Errorf("page lacks %q", s)
				}
			}
			for _, s := range tc.notWant {
				if strings.Contains(body, s) {
					t.Errorf("page has %q", s)
				}
			}
			if !strings.Contains(page, `id="verdict" class="verdict `+tc.class+`"`) {
				t.Errorf("verdict class %q not found", tc.class)
			}
		})
	}
}

// The sweep page's load column claims nothing for layout points ("–" and
// a caption saying feasibility is not computed in multi-cell mode); a
// single-cell point keeps "ok".
func TestSweepPageLoadLayout(t *testing.T) {
	for _, tc := range []struct {
		name    string
		layout  bool
		caption bool
		cell    string
	}{
		{"single cell", false, false, "ok"},
		{"layout", true, true, "–"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rep := &pb.RunReport{SimulatedUserSlots: 1000, NormalisedScenario: &pb.Scenario{Name: "t"},
				Aggregate: &pb.Figures{OutageProbability: &pb.Estimate{Value: 0.1, CiLow: 0.09, CiHigh: 0.11}}}
			if tc.layout {
				rep.NormalisedScenario.Layout = &pb.Layout{Sites: 7}
				rep.Layout = &pb.LayoutReport{Overall: &pb.LayoutOverall{OtherToOwn: &pb.Estimate{Value: 1.5, CiLow: 1.4, CiHigh: 1.6},
					OutageProbability: &pb.Estimate{Value: 0.1, CiLow: 0.09, CiHigh: 0.11}}}
			}
			axes := []*pb.SweepAxis{{Path: "layout.handover.window_db", Values: []float64{3}}}
			pts := []*pb.SweepPoint{{Coordinates: []float64{3}, Report: rep}}
			page := render(t, Input{Sweep: &Sweep{Axes: axes, Points: pts}, Source: "test"})
			doc, err := html.Parse(strings.NewReader(page))
			if err != nil {
				t.Fatal(err)
			}
			var loads []string
			walk(doc, func(n *html.Node) {
				if n.Data == "tr" {
					var cells []string
					for c := n.FirstChild; c != nil; c = c.NextSibling {
						if c.Type == html.ElementNode && c.Data == "td" {
							cells = append(cells, strings.TrimSpace(text(c)))
						}
					}
					if len(cells) > 0 {
						loads = append(loads, cells[len(cells)-1])
					}
				}
			})
			if len(loads) == 0 || loads[0] != tc.cell { // the grid table is the first
				t.Errorf("last cells of the rows %q, want the grid point's load %q first", loads, tc.cell)
			}
			if got := strings.Contains(text(doc), "feasibility is not computed in multi-cell mode"); got != tc.caption {
				t.Errorf("caption note %v, want %v", got, tc.caption)
			}
		})
	}
}

// A capacity page whose smallest count fails still names the varied group
// (index and name) in its headline and gives the fixed users and what the
// result holds about the scenario's own count (here: not tried).
func TestCapacityPageBelowRangeScope(t *testing.T) {
	est := func(m float64) *pb.ReplicationEstimate {
		return &pb.ReplicationEstimate{Mean: m, Low: m - 0.01, High: m + 0.01, N: 2}
	}
	base := &pb.Scenario{Name: "cell", Groups: []*pb.UserGroup{{Name: "walkers", Count: 16}, {Name: "cars", Count: 8}}}
	res := &pb.CapacityResult{BelowRange: true, TotalUsers: 8, Reason: "Even the smallest count tried misses the limits.",
		Evaluated: []*pb.CapacityPoint{{Count: 1, TotalUsers: 9,
			Figures: &pb.TuneFigures{OutageProbability: est(0.15), NoiseRiseMeanDb: est(0.6)}}}}
	req := &pb.CapacityRequest{Base: base, OutageLimit: 0.1, Replications: 4}
	page := render(t, Input{Capacity: res, CapacityRequest: req, Source: "test"})
	doc, err := html.Parse(strings.NewReader(page))
	if err != nil {
		t.Fatal(err)
	}
	body := strings.Join(strings.Fields(text(doc)), " ")
	for _, s := range []string{
		`Even the smallest count searched of group 0 ("walkers") fails at outage ≤ 10.00 %.`,
		`Varied: the count of group 0 ("walkers"), 16 in the scenario. Held fixed at their scenario counts: 8 users in group 1 ("cars").`,
		`The smallest count tried already fails: 1 in group 0 ("walkers"), 9 users in all.`,
		`The scenario's own count, 16, was not tried`,
	} {
		if !strings.Contains(body, s) {
			t.Errorf("page lacks %q", s)
		}
	}
}
