package render

import (
	"bytes"
	"encoding/csv"
	"strings"
	"testing"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// csvHead is the first row of a CSV output.
func csvHead(t *testing.T, out string) []string {
	t.Helper()
	h, err := csv.NewReader(strings.NewReader(out)).Read()
	if err != nil {
		t.Fatalf("CSV header: %v", err)
	}
	return h
}

// TestCSVIntervalColumns: every CSV output names an interval the same way,
// F_ci_low and F_ci_high beside its value column F (run and sweep always
// did; tune and capacity wrote F_low/F_high and diff_low/diff_high), so a
// script reads any of them with one rule.
func TestCSVIntervalColumns(t *testing.T) {
	axes := []*pb.SweepAxis{{Path: "inner_loop.step_db"}}
	var tune, capa, capaLayout bytes.Buffer
	rec := &pb.Recommendation{Candidates: []*pb.GridPoint{{Coords: []*pb.Coord{{Path: "inner_loop.step_db", Value: 1}}}}}
	if err := TuneCSV(&tune, rec); err != nil {
		t.Fatal(err)
	}
	req, res := capacityCase(false)
	if err := CapacityCSV(&capa, req, res); err != nil {
		t.Fatal(err)
	}
	req, res = capacityCase(true)
	if err := CapacityCSV(&capaLayout, req, res); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		head []string
		want []string // interval columns that must be there
	}{
		{"run", RunCSVHeader(false), []string{"outage_probability_ci_low", "convergence_time_s_ci_high"}},
		{"run layout", RunCSVHeader(true), []string{"other_to_own_ci_low", "soft_handover_share_ci_high"}},
		{"sweep", sweepCSVHeader(axes, false), []string{"sir_error_std_db_ci_low"}},
		{"sweep layout", sweepCSVHeader(axes, true), []string{"other_to_own_ci_high"}},
		{"tune", csvHead(t, tune.String()), []string{"objective_ci_low", "objective_ci_high", "diff_to_best_ci_low", "diff_to_best_ci_high", "tx_power_mean_dbm_ci_low"}},
		{"capacity", csvHead(t, capa.String()), []string{"outage_probability_ci_low", "noise_rise_mean_db_ci_high"}},
		{"capacity layout", csvHead(t, capaLayout.String()), []string{"outage_probability_ci_low"}},
	} {
		cols := map[string]bool{}
		for _, c := range tc.head {
			cols[c] = true
		}
		for _, w := range tc.want {
			if !cols[w] {
				t.Errorf("%s: no column %s in %v", tc.name, w, tc.head)
			}
		}
		for _, c := range tc.head {
			for _, suf := range []string{"_low", "_high"} {
				if !strings.HasSuffix(c, suf) {
					continue
				}
				if !strings.HasSuffix(c, "_ci"+suf) {
					t.Errorf("%s: column %s is not named F_ci%s", tc.name, c, suf)
					continue
				}
				if v := strings.TrimSuffix(c, "_ci"+suf); !cols[v] {
					t.Errorf("%s: interval column %s has no value column %s", tc.name, c, v)
				}
			}
		}
	}
}

// TestGroupNumbersIn: whole numbers of four or more digits in an engine's
// note are grouped as the tables group them ("2 400"); decimals, versions
// and names are not touched. Wrap keeps a grouped number on one line.
func TestGroupNumbersIn(t *testing.T) {
	for _, tc := range []struct{ in, want string }{
		{"the 2400 measured slots", "the 2 400 measured slots"},
		{"(50 m / 0.833 m/s = 90000 slots); at least 3600000 measured slots", "(50 m / 0.833 m/s = 90 000 slots); at least 3 600 000 measured slots"},
		{"block_slots/bler_target = 1500 slots): set run.warmup_slots to 1500.", "block_slots/bler_target = 1 500 slots): set run.warmup_slots to 1 500."},
		{"warm-up of 600 slots, 4 batch groups of 10", "warm-up of 600 slots, 4 batch groups of 10"},
		{"engine fadeloop-multicell/1.3.0, f 1.2345, 0.00125 s, 1500.25 slots", "engine fadeloop-multicell/1.3.0, f 1.2345, 0.00125 s, 1500.25 slots"},
		{"p1500 x_2000 2000m 3GPP TS 25.331 01234", "p1500 x_2000 2000m 3GPP TS 25.331 01234"},
	} {
		if got := GroupNumbersIn(tc.in, " "); got != tc.want {
			t.Errorf("GroupNumbersIn(%q) = %q, want %q", tc.in, got, tc.want)
		}
	}
	w := Wrap("- "+GroupNumbersIn("aaaa bbbb cccc dddd at least 3600000 measured slots", " "), 30, "  ")
	if !strings.Contains(w, "3 600 000") {
		t.Errorf("Wrap split a grouped number:\n%s", w)
	}
}

// TestLegStateName: the layout's last handover state is "3 or more cells
// in the active set" (LayoutOverall); with at most 3 active it is exactly
// 3, and states above max_active are not listed.
func TestLegStateName(t *testing.T) {
	est := func(v float64) *pb.Estimate { return &pb.Estimate{Value: v, CiLow: v, CiHigh: v} }
	for _, tc := range []struct {
		maxActive int32
		rows      []string
	}{
		{1, []string{"1"}},
		{2, []string{"1", "2"}},
		{3, []string{"1", "2", "3"}},
		{6, []string{"1", "2", "3–6"}},
	} {
		rep := csvTestReport(true)
		rep.NormalisedScenario.Layout.Handover = &pb.Handover{MaxActive: tc.maxActive}
		o := rep.Layout.Overall
		o.LegShare = []*pb.Estimate{est(0.7), est(0.2), est(0.1)}
		o.OutageByLegs = []*pb.Estimate{est(0.1), est(0.1), est(0.1)}
		o.TimeAtMaxByLegs = []*pb.Estimate{est(0), est(0), est(0)}
		legs := LayoutParts(rep, ci)[1]
		var got []string
		for _, r := range legs.Rows {
			got = append(got, r[0])
		}
		if strings.Join(got, ",") != strings.Join(tc.rows, ",") {
			t.Errorf("max_active %d: rows %v, want %v", tc.maxActive, got, tc.rows)
		}
	}
}

// TestIntervalLabel: every CLI table heads an interval "95 % interval",
// the form of the API's own sentences ("95 % interval [1.99, 2.22] dB"),
// never "95 % CI"; the per-cell table says served users are a mean.
func TestIntervalLabel(t *testing.T) {
	rep := csvTestReport(true)
	rep.NormalisedScenario.Layout.Handover = &pb.Handover{MaxActive: 3}
	rep.Layout.Cells = []*pb.LayoutCell{{Name: "S0/0", ServedUsers: 9.9, OtherToOwn: &pb.Estimate{Value: 1}, NoiseRiseDb: &pb.Estimate{Value: 1}}}
	var b bytes.Buffer
	RunTable(&b, rep, false)
	out := b.String()
	for _, want := range []string{"figure  ", "95 % interval", "mean served users", "f (other_to_own in the JSON and CSV)"} {
		if !strings.Contains(out, want) {
			t.Errorf("run table lacks %q:\n%s", want, out)
		}
	}
	for _, bad := range []string{"95 % CI", "3+", "other-cell / own-cell interference f "} {
		if strings.Contains(out, bad) {
			t.Errorf("run table says %q:\n%s", bad, out)
		}
	}
}
