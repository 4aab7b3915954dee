package render

import (
	"bytes"
	"strings"
	"testing"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// capacityCase is a capacity result as the server returns it for a
// single-cell base or a layout of 7 sites × 3 sectors (21 cells): 23 users
// per count at the capacity, the pole inputs the server filled (layout: the
// measured f = 1.65 and one sector per cell).
func capacityCase(layout bool) (*pb.CapacityRequest, *pb.CapacityResult) {
	base := &pb.Scenario{Groups: []*pb.UserGroup{{Name: "walkers", Count: 6}, {Name: "cars", Count: 3}}}
	pp := &pb.PoleParams{ChipRateHz: 3.84e6, BitRateBps: 12.2e3, EbI0Db: 5, ActivityFactor: 1, OtherCellRatio: 0, Sectors: 1}
	pole, model := 99.5, 100.5
	if layout {
		base.Layout = &pb.Layout{Sites: 7, SectorsPerSite: 3}
		pp.OtherCellRatio = 1.65
		pole, model = 37.6, 37.9
	}
	est := func(m, lo, hi float64) *pb.ReplicationEstimate {
		return &pb.ReplicationEstimate{Mean: m, Low: lo, High: hi, N: 2}
	}
	pt := func(count int32, pass bool) *pb.CapacityPoint {
		return &pb.CapacityPoint{Count: count, TotalUsers: count + 3, Pass: pass, OutageOk: true, NoiseRiseOk: pass, LoadFeasible: true,
			Figures: &pb.TuneFigures{OutageProbability: est(0.07, 0.06, 0.08), NoiseRiseMeanDb: est(5.7, 3.2, 8.3)}}
	}
	req := &pb.CapacityRequest{Base: base, OutageLimit: 0.2, Replications: 2}
	res := &pb.CapacityResult{Count: 20, TotalUsers: 23, Pole: pole, ModelPole: model, PoleParams: pp,
		Evaluated: []*pb.CapacityPoint{pt(20, true), pt(21, false)}, OutageLimit: 0.2, NoiseRiseLimitDb: 6,
		Headline: "Capacity: 23 users.", Reason: "Up to 23 users meet the limits."}
	return req, res
}

// A capacity search of a layout counts users per cell: the table and CSV
// say so (with the layout's total: 21 cells), show the pole with the
// measured f and one sector per cell, and show the load limit as not
// computed ("–", an empty CSV cell), never "feasible"; a single-cell search
// keeps "users in all", total_users and "feasible".
func TestCapacityOutputsLayout(t *testing.T) {
	for _, tc := range []struct {
		name         string
		layout       bool
		table, noTab []string
		header       string
		row0         string
	}{
		{"single cell", false,
			[]string{"20 in the group, 23 users in all", "Pole capacity (Gilhousen et al. 1991): 99.5 users", "f = 0, 1 sector", "feasible"},
			[]string{"per cell", "load –"},
			"count,total_users,pass,outage_ok,noise_rise_ok,load_feasible,capacity,n,", "20,23,true,true,true,true,true,2,"},
		{"layout", true,
			[]string{"20 in the group, 23 users per cell (483 in the layout's 21 cells)",
				"Pole capacity of one cell (Gilhousen et al. 1991): 37.6 users per cell", "f = 1.65 measured in the layout, 1 sector",
				"with the same f: 37.9 users per cell", "count  users per cell", "load –: feasibility is not computed in multi-cell mode"},
			[]string{"users in all", "feasible ", "f = 0,"},
			"count,users_per_cell,layout_users,pass,outage_ok,noise_rise_ok,load_feasible,capacity,n,", "20,23,483,true,true,true,,true,2,"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			req, res := capacityCase(tc.layout)
			var b bytes.Buffer
			CapacityTable(&b, req, res)
			out := b.String()
			for _, s := range tc.table {
				if !strings.Contains(out, s) {
					t.Errorf("table lacks %q:\n%s", s, out)
				}
			}
			for _, s := range tc.noTab {
				if strings.Contains(out, s) {
					t.Errorf("table has %q:\n%s", s, out)
				}
			}
			b.Reset()
			if err := CapacityCSV(&b, req, res); err != nil {
				t.Fatal(err)
			}
			lines := strings.Split(b.String(), "\n")
			if !strings.HasPrefix(lines[0], tc.header) {
				t.Errorf("CSV header %q, want prefix %q", lines[0], tc.header)
			}
			if !strings.HasPrefix(lines[1], tc.row0) {
				t.Errorf("CSV row %q, want prefix %q", lines[1], tc.row0)
			}
		})
	}
}
