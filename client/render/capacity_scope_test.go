package render

import (
	"bytes"
	"strings"
	"testing"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// Every capacity output names the varied group (index and name) and the
// users held fixed, in the passing and in the failing case; when even the
// smallest count fails it says so and states only what the result holds
// about the scenario's own count of the group: not tried, or tried with
// its outcome. The base is two groups, "walkers" 6 (varied) and "cars" 3
// (fixed), as in capacityCase; the figures are invented, not physics.
func TestCapacityScope(t *testing.T) {
	est := func(m float64) *pb.ReplicationEstimate {
		return &pb.ReplicationEstimate{Mean: m, Low: m - 0.01, High: m + 0.01, N: 2}
	}
	pt := func(count int32, pass bool, outage float64) *pb.CapacityPoint {
		return &pb.CapacityPoint{Count: count, TotalUsers: count + 3, Pass: pass, OutageOk: pass, NoiseRiseOk: true, LoadFeasible: true,
			Figures: &pb.TuneFigures{OutageProbability: est(outage), NoiseRiseMeanDb: est(1)}}
	}
	varied := `Varied: the count of group 0 ("walkers"), 6 in the scenario. Held fixed at their scenario counts: 3 users in group 1 ("cars").`
	for _, tc := range []struct {
		name    string
		layout  bool
		below   bool
		ev      []*pb.CapacityPoint
		want    []string
		notWant []string
	}{
		{"pass", false, false, []*pb.CapacityPoint{pt(20, true, 0.05), pt(21, false, 0.12)},
			[]string{varied}, []string{"already fails"}},
		{"below range, own count not tried", false, true, []*pb.CapacityPoint{pt(1, false, 0.15)},
			[]string{varied, "The smallest count tried already fails: 1 in group 0 (\"walkers\"), 4 users in all.",
				"The scenario's own count, 6, was not tried"},
			[]string{"not monotone"}},
		{"below range from 8, own count 6 tried and passes", false, true, []*pb.CapacityPoint{pt(6, true, 0.05), pt(4, false, 0.15)},
			[]string{"The scenario's own count, 6, passes (outage 5.00 [4.00, 6.00] %): with the other groups (3 users) held fixed, the outcome is not monotone"}, nil},
		{"layout below range", true, true, []*pb.CapacityPoint{pt(1, false, 0.15)},
			[]string{"Held fixed at their scenario counts: 3 users per cell in group 1 (\"cars\").",
				"1 in group 0 (\"walkers\"), 4 users per cell (84 in the layout's 21 cells)"}, nil},
	} {
		t.Run(tc.name, func(t *testing.T) {
			req, res := capacityCase(tc.layout)
			res.Evaluated, res.BelowRange = tc.ev, tc.below
			if tc.below {
				res.Count, res.TotalUsers = 0, 3
			}
			var b bytes.Buffer
			CapacityTable(&b, req, res)
			// The table wraps at 78 columns: compare with spaces joined.
			out := strings.Join(strings.Fields(b.String()), " ")
			for _, s := range tc.want {
				if !strings.Contains(out, s) {
					t.Errorf("table lacks %q:\n%s", s, b.String())
				}
			}
			for _, s := range tc.notWant {
				if strings.Contains(out, s) {
					t.Errorf("table has %q:\n%s", s, b.String())
				}
			}
		})
	}
}

// The capacity CSV closes every row with the varied group, its name and
// the fixed users, after all the earlier columns (whose places stay).
func TestCapacityCSVScope(t *testing.T) {
	req, res := capacityCase(false)
	var b bytes.Buffer
	if err := CapacityCSV(&b, req, res); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(b.String()), "\n")
	if !strings.HasSuffix(lines[0], ",varied_group,varied_group_name,fixed_users") {
		t.Errorf("header %q lacks the scope columns at its end", lines[0])
	}
	for _, l := range lines[1:] {
		if !strings.HasSuffix(l, ",0,walkers,3") {
			t.Errorf("row %q does not end with 0,walkers,3", l)
		}
	}
}
