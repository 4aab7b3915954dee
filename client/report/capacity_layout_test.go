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
			[]string{"20 in the group, 23 users in all", "f = 0, 1 sector(s)", "2 per count", "fadeloop-loop/9.9.9"},
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
