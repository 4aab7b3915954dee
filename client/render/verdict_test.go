package render

import (
	"bytes"
	"encoding/csv"
	"strings"
	"testing"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// The labels below are the ones the service sends (loop/tune figure
// labels, helper V's guide): dB figures differ in dB, proportions are
// shown in % and differ in percentage points.
var (
	stdLabel    = &pb.FigureLabel{Key: "sir_error_std_db", Name: "SIR error std", Unit: "dB", DiffUnit: "dB", DisplayScale: 1, Decimals: 2}
	outageLabel = &pb.FigureLabel{Key: "outage_probability", Name: "outage", Unit: "%", DiffUnit: "percentage points", DisplayScale: 100, Decimals: 2}
	excessLabel = &pb.FigureLabel{Key: "constraint_excess", Name: "worst constraint excess", Unit: "% of limit", DiffUnit: "percentage points", DisplayScale: 100, Decimals: 1}
	txLabel     = &pb.FigureLabel{Key: "tx_power_mean_dbm", Name: "mean Tx power", Unit: "dBm", DiffUnit: "dB", DisplayScale: 1, Decimals: 2}
)

func est(mean, lo, hi float64) *pb.ReplicationEstimate {
	return &pb.ReplicationEstimate{Mean: mean, Low: lo, High: hi, N: 4}
}

// testRecommendation is a one-condition recommendation over three step
// sizes whose decision d ranks them in d.Ordering. Candidate k's outage is
// asymmetric around its mean (a Wilson interval near 0).
func testRecommendation(d *pb.Decision) *pb.Recommendation {
	steps := []float64{0.25, 0.5, 1}
	var cands []*pb.GridPoint
	var crs []*pb.CandidateResult
	for k, s := range steps {
		cands = append(cands, &pb.GridPoint{Index: int32(k), Coords: []*pb.Coord{{Path: "inner_loop.step_db", Value: s}}})
		crs = append(crs, &pb.CandidateResult{
			Candidate:  int32(k),
			Objective:  est(2+0.1*float64(k), 1.9+0.1*float64(k), 2.1+0.1*float64(k)),
			DiffToBest: est(0.1*float64(k), 0.05*float64(k), 0.15*float64(k)),
			Feasible:   true,
			Figures: &pb.TuneFigures{
				SirErrorStdDb:     est(2+0.1*float64(k), 1.9+0.1*float64(k), 2.1+0.1*float64(k)),
				OutageProbability: est(0.02, 0.01, 0.05),
				TxPowerMeanDbm:    est(5, 4, 6),
			},
		})
	}
	d.Setting = cands[d.Best]
	return &pb.Recommendation{
		Objective:         &pb.Objective{Kind: pb.ObjectiveKind_OBJECTIVE_KIND_MIN_SIR_ERROR_STD},
		Confidence:        0.95,
		Candidates:        cands,
		Conditions:        []*pb.ConditionResult{{Name: "30 km/h", Weight: 1, Candidates: crs, Decision: d}},
		Overall:           d,
		OverallCandidates: crs,
		TieRule:           "smaller inner_loop.step_db, then grid order",
		Figures:           []*pb.FigureLabel{stdLabel, outageLabel, txLabel},
		Notice:            "Simulated settings do not replace planning.",
		Effort:            &pb.TuneEffort{},
	}
}

// candidateRows returns the candidate column ("* 2") of the first
// per-condition table's rows, in printed order.
func candidateRows(t *testing.T, out string) []string {
	t.Helper()
	lines := strings.Split(out, "\n")
	var rows []string
	in := false
	for _, l := range lines {
		switch {
		case strings.HasPrefix(l, "  #"):
			in = true
		case in && strings.TrimSpace(l) == "":
			return rows
		case in:
			rows = append(rows, strings.Join(strings.Fields(l[:3]), " "))
		}
	}
	return rows
}

func TestTuneTablePrintsTheVerdict(t *testing.T) {
	tests := []struct {
		name     string
		d        *pb.Decision
		want     []string // in this order
		never    []string
		rows     []string // candidate column of the condition table, in order
		csvVerd  string
		firstCSV string // candidate of the rank-1 condition row
	}{
		{
			name: "tie",
			d: &pb.Decision{Best: 2, Leader: 0, RunnerUp: 0, TieSet: []int32{0, 2}, Ordering: []int32{2, 0, 1},
				Verdict: pb.Verdict_VERDICT_TIE, RankedBy: stdLabel, Evidence: est(-0.01, -0.03, 0.01),
				Headline:     "Tie of 2 at 95 %: step_db=1 is recommended by the tie rule.",
				RunnerUpLine: "Runner-up: step_db=0.25, within the tie.",
				Warnings:     []*pb.DecisionWarning{{Kind: pb.WarningKind_WARNING_KIND_HIGH_OUTAGE, Text: "Warning: step_db=1 has outage 12.00 %."}}},
			want:     []string{"Verdict: tie of 2", "Tie of 2 at 95 %", "Runner-up: step_db=0.25", "Warning: step_db=1 has outage 12.00 %.", "Tie rule: smaller inner_loop.step_db", "tie of 2"},
			never:    []string{"winner", "Winner", "±", "leader"},
			rows:     []string{"* 2", "0", "1"},
			csvVerd:  "tie",
			firstCSV: "2",
		},
		{
			name: "constraints unmet",
			d: &pb.Decision{Best: 1, Leader: 1, RunnerUp: 2, Ordering: []int32{1, 2, 0}, ConstraintsUnmet: true,
				Verdict: pb.Verdict_VERDICT_CONSTRAINTS_UNMET, RankedBy: excessLabel, Evidence: est(0.5, 0.2, 0.8),
				Headline:     "Constraints unmet: no setting meets outage ≤ 2.00 %. Closest: step_db=0.5.",
				RunnerUpLine: "Runner-up: step_db=1, worst constraint excess 50.0 percentage points worse.",
				Misses:       []*pb.ConstraintMiss{{Condition: "30 km/h", Figure: "outage_probability", Value: 0.12, Limit: 0.02, Upper: true, Excess: 0.1, Text: "outage 12.00 % against a limit of 2.00 %"}}},
			want: []string{"Verdict: constraints unmet", "Constraints unmet: no setting", "Closest setting misses, in 30 km/h: outage 12.00 %",
				"Runner-up: step_db=1", "worst constraint excess (% of limit)", "50.0 [20.0, 80.0] pp", "constraints unmet"},
			never:    []string{"winner", "Winner", "±", "Tie rule"},
			rows:     []string{"* 1", "2", "0"},
			csvVerd:  "constraints_unmet",
			firstCSV: "1",
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			rec := testRecommendation(tc.d)
			var b bytes.Buffer
			TuneTable(&b, &pb.TuneRequest{}, rec)
			out := b.String()
			at := 0
			for _, w := range tc.want {
				i := strings.Index(out[at:], w)
				if i < 0 {
					t.Fatalf("missing (or out of order) %q after byte %d:\n%s", w, at, out)
				}
				at += i + len(w)
			}
			for _, n := range tc.never {
				if strings.Contains(out, n) {
					t.Errorf("output contains %q:\n%s", n, out)
				}
			}
			// The headline is the first line after the verdict: an unmet
			// constraint is said before anything else about the result.
			if i, j := strings.Index(out, tc.d.GetHeadline()[:20]), strings.Index(out, "Runner-up"); i < 0 || i > j {
				t.Errorf("headline not before the runner-up:\n%s", out)
			}
			if got := candidateRows(t, out); strings.Join(got, "|") != strings.Join(tc.rows, "|") {
				t.Errorf("condition rows %q, want %q (ordering, recommended first and marked)", got, tc.rows)
			}
			// Asymmetric intervals print both ends: outage 2 % in [1, 5] %.
			if !strings.Contains(out, "2.00 [1.00, 5.00]") {
				t.Errorf("asymmetric outage interval not printed as [low, high]:\n%s", out)
			}

			b.Reset()
			if err := TuneCSV(&b, rec); err != nil {
				t.Fatal(err)
			}
			rows, err := csv.NewReader(&b).ReadAll()
			if err != nil {
				t.Fatal(err)
			}
			col := map[string]int{}
			for i, h := range rows[0] {
				col[h] = i
			}
			vi, ri, ci := col["verdict"], col["rank"], col["candidate"]
			if vi == 0 || ri == 0 {
				t.Fatalf("CSV header lacks verdict/rank: %v", rows[0])
			}
			first := rows[1]
			if first[0] != "condition" || first[ri] != "1" || first[ci] != tc.firstCSV || first[vi] != tc.csvVerd {
				t.Errorf("first CSV row %v: want condition rank 1 candidate %s verdict %s", first, tc.firstCSV, tc.csvVerd)
			}
		})
	}
}

// TestRunTableInfeasibleBeforeRun: a report judged infeasible before the
// run (simulated_user_slots 0) prints the feasibility verdict and no
// figures table; its CSV row has empty figure cells, not zeros.
func TestRunTableInfeasibleBeforeRun(t *testing.T) {
	rep := &pb.RunReport{
		Seed:      1,
		Aggregate: &pb.Figures{Users: 384, SirErrorStdDb: &pb.Estimate{}},
		Feasibility: &pb.Feasibility{Infeasible: true, LoadFactor: 4.584, Users: []int32{0, 1, 2},
			Reason: "not simulated: pole capacity exceeded"},
	}
	var b bytes.Buffer
	RunTable(&b, rep, true)
	out := b.String()
	for _, w := range []string{"384 users", "not simulated", "INFEASIBLE LOAD", "load factor 4.584", "3 of 384 users", "No figures"} {
		if !strings.Contains(out, w) {
			t.Errorf("lacks %q:\n%s", w, out)
		}
	}
	for _, n := range []string{"SIR error std (dB)", "95 % interval", "0.00"} {
		if strings.Contains(out, n) {
			t.Errorf("infeasible-before-run output shows figures (%q):\n%s", n, out)
		}
	}
	b.Reset()
	if err := RunCSV(&b, rep); err != nil {
		t.Fatal(err)
	}
	rows, _ := csv.NewReader(&b).ReadAll()
	if len(rows) != 2 || rows[1][8] != "" {
		t.Errorf("CSV of an infeasible-before-run report: %v", rows)
	}
}

// TestTunePlotDataMarksTheRecommended: the heat map outlines and the step
// plot rings the recommended candidate (best), not the best point
// estimate (leader), which differ inside a tie.
func TestTunePlotDataMarksTheRecommended(t *testing.T) {
	d := &pb.Decision{Best: 2, Leader: 0, TieSet: []int32{0, 2}, Ordering: []int32{2, 0, 1},
		Verdict: pb.Verdict_VERDICT_TIE, RankedBy: stdLabel}
	rec := testRecommendation(d)
	ls, ok := TuneStepLines(rec)
	if !ok || len(ls) != 1 {
		t.Fatalf("step lines: %v %v", ls, ok)
	}
	if got := ls[0].Recommended; len(got) != 3 || got[0] || got[1] || !got[2] || ls[0].StepDB[2] != 1 {
		t.Errorf("recommended marks %v over steps %v, want only step 1", got, ls[0].StepDB)
	}
	if _, ok := TuneObjectiveGrid(rec); ok {
		t.Error("heat map from a one-axis search")
	}
	// Two axes: step × rate, candidate 3 (step 1, rate 1500) recommended
	// although candidate 0 has the lowest value.
	var cands []*pb.GridPoint
	var crs []*pb.CandidateResult
	for k, c := range [][2]float64{{0.5, 750}, {1, 750}, {0.5, 1500}, {1, 1500}} {
		cands = append(cands, &pb.GridPoint{Coords: []*pb.Coord{{Path: StepPath, Value: c[0]}, {Path: RatePath, Value: c[1]}}})
		crs = append(crs, &pb.CandidateResult{Candidate: int32(k), Objective: est(1+0.01*float64(k), 0.9, 1.2)})
	}
	rec = &pb.Recommendation{Candidates: cands, OverallCandidates: crs, Conditions: []*pb.ConditionResult{{}},
		Overall: &pb.Decision{Best: 3, Leader: 0, Verdict: pb.Verdict_VERDICT_TIE, TieSet: []int32{0, 3}, RankedBy: stdLabel}}
	g, ok := TuneObjectiveGrid(rec)
	if !ok || !g.Marked || g.MarkRow != 1 || g.MarkCol != 1 || !strings.Contains(g.MarkLabel, "tie of 2") {
		t.Errorf("grid mark %v (%d, %d) %q, want row 1 col 1 of a tie", g.Marked, g.MarkRow, g.MarkCol, g.MarkLabel)
	}
	if g.Objective != "SIR error std (dB)" {
		t.Errorf("grid objective %q", g.Objective)
	}
}
