package render

import (
	"bytes"
	"encoding/csv"
	"math"
	"strings"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// csvRecords reads a CSV of a header and one or more rows into one map per
// row (column name → cell), failing on a row of another width.
func csvRecords(t *testing.T, b *bytes.Buffer) (header []string, rows []map[string]string) {
	t.Helper()
	all, err := csv.NewReader(b).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range all[1:] {
		m := map[string]string{}
		for i, h := range all[0] {
			m[h] = r[i]
		}
		rows = append(rows, m)
	}
	return all[0], rows
}

// csvTestReport is a run report whose every aggregate figure is 0 with
// interval [0, 0] except the outage (0.1 [0.09, 0.11]) and noise rise, as
// the multi-cell engine leaves the figures it does not compute; layout
// adds the layout section (f 1.5 [1.4, 1.6], soft-handover share 0.3
// [0.28, 0.32]).
func csvTestReport(layout bool) *pb.RunReport {
	zero := func() *pb.Estimate { return &pb.Estimate{} }
	agg := &pb.Figures{Users: 189, UserSlots: 1000,
		OutageProbability:     &pb.Estimate{Value: 0.1, CiLow: 0.09, CiHigh: 0.11},
		NoiseRiseMeanDb:       &pb.Estimate{Value: 1.3, CiLow: 1.2, CiHigh: 1.4},
		NoiseRiseP95Db:        &pb.Estimate{Value: 2.3, CiLow: 1.9, CiHigh: 2.7},
		TxPowerPercentilesDbm: &pb.Percentiles{P1: zero()}, SirErrorPercentilesDb: &pb.Percentiles{P50: zero()},
		ConvergenceTimeS: zero()}
	rep := &pb.RunReport{Aggregate: agg, SimulatedUserSlots: 1000}
	if layout {
		rep.NormalisedScenario = &pb.Scenario{Layout: &pb.Layout{Sites: 7, SectorsPerSite: 3}}
		rep.Layout = &pb.LayoutReport{Overall: &pb.LayoutOverall{
			OtherToOwn:        &pb.Estimate{Value: 1.5, CiLow: 1.4, CiHigh: 1.6},
			SoftHandoverShare: &pb.Estimate{Value: 0.3, CiLow: 0.28, CiHigh: 0.32},
			NoiseRiseDb:       &pb.Estimate{Value: 1.3, CiLow: 1.2, CiHigh: 1.4}}}
	}
	return rep
}

// The CSV of a layout run or sweep writes empty cells for the figures the
// multi-cell engine does not compute (percentiles, convergence time,
// feasibility) — a script must not read "Tx power 1st percentile 0 dBm" —
// and adds the layout's own figures under their proto names; a single-cell
// report keeps its columns and its computed zeros. (Missing values are
// empty cells: README, "missing intervals are empty cells".)
func TestCSVLayoutColumns(t *testing.T) {
	// The single-cell header as it was before layout columns existed
	// (8 scope columns + 20 figures × 3).
	const singleWidth = 8 + 3*20
	for _, tc := range []struct {
		name   string
		layout bool
		want   map[string]string
		absent []string
	}{
		{"single cell", false, map[string]string{
			"tx_power_p1_dbm": "0", "tx_power_p1_dbm_ci_low": "0", "sir_error_p50_db": "0", "convergence_time_s": "0",
			"outage_probability": "0.1", "noise_rise_p95_db": "2.3",
		}, []string{"other_to_own", "soft_handover_share"}},
		{"layout", true, map[string]string{
			"tx_power_p1_dbm": "", "tx_power_p1_dbm_ci_low": "", "tx_power_p1_dbm_ci_high": "", "sir_error_p50_db": "",
			"convergence_time_s": "", "convergence_time_s_ci_high": "",
			"outage_probability": "0.1", "noise_rise_mean_db": "1.3", "noise_rise_p95_db": "2.3", "noise_rise_p95_db_ci_low": "1.9",
			"other_to_own": "1.5", "other_to_own_ci_low": "1.4", "other_to_own_ci_high": "1.6",
			"soft_handover_share": "0.3", "soft_handover_share_ci_low": "0.28", "soft_handover_share_ci_high": "0.32",
		}, []string{"noise_rise_db", "total_users"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rep := csvTestReport(tc.layout)
			check := func(what string, header []string, row map[string]string, width int) {
				t.Helper()
				if len(header) != width {
					t.Errorf("%s: %d columns, want %d", what, len(header), width)
				}
				for k, v := range tc.want {
					got, ok := row[k]
					if !ok || got != v {
						t.Errorf("%s: %s = %q (present %v), want %q", what, k, got, ok, v)
					}
				}
				for _, k := range tc.absent {
					if _, ok := row[k]; ok {
						t.Errorf("%s: column %s present, want absent", what, k)
					}
				}
			}
			width := singleWidth
			if tc.layout {
				width += 6
			}
			var b bytes.Buffer
			if err := RunCSV(&b, rep); err != nil {
				t.Fatal(err)
			}
			h, rows := csvRecords(t, &b)
			check("run", h, rows[0], width)
			if strings.Join(h[:singleWidth], ",") != strings.Join(RunCSVHeader(false), ",") {
				t.Errorf("run: the layout columns must follow the single-cell ones unchanged")
			}

			axes := []*pb.SweepAxis{{Path: "layout.handover.window_db", Values: []float64{3}}}
			pt := &pb.SweepPoint{Index: 0, Seed: 1, Coordinates: []float64{3}, Report: rep}
			b.Reset()
			if err := SweepCSV(&b, axes, []*pb.SweepPoint{pt}, tc.layout); err != nil {
				t.Fatal(err)
			}
			h, rows = csvRecords(t, &b)
			check("sweep", h, rows[0], width-8+6) // index, seed, axis, feasible, users, user_slots
			feasible := "true"
			if tc.layout {
				feasible = "" // the multi-cell engine computes no feasibility
			}
			if rows[0]["feasible"] != feasible {
				t.Errorf("sweep: feasible = %q, want %q", rows[0]["feasible"], feasible)
			}
		})
	}
}

// SweepIsLayout: a sweep has the layout columns when its base has a
// layout or an axis varies layout.sites (a single-cell point's layout
// cells are then empty).
func TestSweepIsLayout(t *testing.T) {
	for _, tc := range []struct {
		name string
		req  *pb.SweepRequest
		want bool
	}{
		{"single cell", &pb.SweepRequest{Base: &pb.Scenario{}, Axes: []*pb.SweepAxis{{Path: "inner_loop.step_db"}}}, false},
		{"layout base", &pb.SweepRequest{Base: &pb.Scenario{Layout: &pb.Layout{Sites: 7}}}, true},
		{"sites axis", &pb.SweepRequest{Base: &pb.Scenario{}, Axes: []*pb.SweepAxis{{Path: "layout.sites"}}}, true},
	} {
		if got := SweepIsLayout(tc.req); got != tc.want {
			t.Errorf("%s: SweepIsLayout = %v, want %v", tc.name, got, tc.want)
		}
	}
	var b bytes.Buffer
	single := &pb.SweepPoint{Coordinates: []float64{0}, Report: csvTestReport(false)}
	if err := SweepCSV(&b, []*pb.SweepAxis{{Path: "layout.sites"}}, []*pb.SweepPoint{single}, true); err != nil {
		t.Fatal(err)
	}
	_, rows := csvRecords(t, &b)
	if rows[0]["other_to_own"] != "" || rows[0]["feasible"] != "true" || rows[0]["tx_power_p1_dbm"] != "0" {
		t.Errorf("single-cell point of a layout sweep: other_to_own %q feasible %q tx_power_p1_dbm %q, want \"\", true, 0",
			rows[0]["other_to_own"], rows[0]["feasible"], rows[0]["tx_power_p1_dbm"])
	}
}

// The sweep table's load column claims nothing for a layout point ("–"
// and a footnote: the multi-cell engine computes no feasibility) and
// keeps "ok" for a single-cell point.
func TestSweepTableLoadLayout(t *testing.T) {
	for _, tc := range []struct {
		name            string
		layout          bool
		load            string
		footnote, hasOK bool
	}{
		{"single cell", false, "ok", false, true},
		{"layout", true, "–", true, false},
	} {
		var b bytes.Buffer
		pt := &pb.SweepPoint{Coordinates: []float64{3}, Report: csvTestReport(tc.layout)}
		SweepTable(&b, &pb.SweepRequest{Axes: []*pb.SweepAxis{{Path: "layout.handover.window_db"}}}, []*pb.SweepPoint{pt}, nil)
		lines := strings.Split(strings.TrimSpace(b.String()), "\n")
		row := lines[1]
		if !strings.HasSuffix(row, "  "+tc.load) {
			t.Errorf("%s: row %q does not end in load %q", tc.name, row, tc.load)
		}
		if got := strings.Contains(b.String(), "feasibility is not computed in multi-cell mode"); got != tc.footnote {
			t.Errorf("%s: footnote %v, want %v:\n%s", tc.name, got, tc.footnote, b.String())
		}
		if got := strings.HasSuffix(row, " ok"); got != tc.hasOK {
			t.Errorf("%s: row ends in ok: %v, want %v", tc.name, got, tc.hasOK)
		}
	}
}

// The sweep table says why a value has no interval (the first such point's
// notes, without the caution) and says nothing when every interval is
// given; the points' caution closes the table once, not as a note.
func TestSweepTableWithheldNote(t *testing.T) {
	for _, tc := range []struct {
		name     string
		withhold bool
	}{
		{"intervals given", false},
		{"one replication, withheld", true},
	} {
		rep := csvTestReport(true)
		const why = "one replication: no intervals (bounds not available)"
		if tc.withhold {
			rep.Aggregate.OutageProbability.CiLow, rep.Aggregate.OutageProbability.CiHigh = math.NaN(), math.NaN()
			rep.Notes = append(rep.Notes, why)
		}
		// The multi-cell engine's caution note, on every layout report.
		rep.Notes = append(rep.Notes, loop.Caution)
		var b bytes.Buffer
		SweepTable(&b, &pb.SweepRequest{Axes: []*pb.SweepAxis{{Path: "layout.handover.window_db"}}}, []*pb.SweepPoint{{Index: 4, Coordinates: []float64{3}, Report: rep}}, nil)
		out := b.String()
		if got := strings.Contains(out, "values without an interval: it is withheld; point 4's notes:") && strings.Contains(out, why); got != tc.withhold {
			t.Errorf("%s: note shown %v, want %v:\n%s", tc.name, got, tc.withhold, out)
		}
		if strings.Contains(out, "- simulated settings do not replace") {
			t.Errorf("%s: the caution is printed among the notes:\n%s", tc.name, out)
		}
		// The caution is wrapped at 78 columns: compare with spaces joined.
		if n := strings.Count(out, "do not replace the operator"); n != 1 || !strings.HasSuffix(strings.Join(strings.Fields(out), " "), loop.Caution) {
			t.Errorf("%s: caution %d times (want once, last):\n%s", tc.name, n, out)
		}
	}
}
