package render

import (
	"bytes"
	"encoding/csv"
	"strings"
	"testing"

	"github.com/fadeloop/fadeloop/client/plots"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// An infeasible load found before the run has no figures: the sweep table
// shows "—" and INFEASIBLE, the CSV empty cells, never zeros; the heat map
// draws the cell grey with the word (and draws even when every cell is
// infeasible).
func TestInfeasiblePointsShownAsSuch(t *testing.T) {
	axes := []*pb.SweepAxis{{Path: "inner_loop.step_db", Values: []float64{0.5, 1}}}
	ok := &pb.SweepPoint{Index: 0, Coordinates: []float64{0.5}, Report: &pb.RunReport{SimulatedUserSlots: 1000,
		Aggregate: &pb.Figures{OutageProbability: &pb.Estimate{Value: 0.05, CiLow: 0.04, CiHigh: 0.06}}}}
	bad := &pb.SweepPoint{Index: 1, Coordinates: []float64{1}, Report: &pb.RunReport{
		Feasibility: &pb.Feasibility{Infeasible: true}, Aggregate: &pb.Figures{}}}
	var tb bytes.Buffer
	SweepTable(&tb, &pb.SweepRequest{Axes: axes}, []*pb.SweepPoint{ok, bad}, &pb.SweepSummary{})
	// The row of point 1 (the table's last; a summary and the caution
	// follow it).
	last := ""
	for _, l := range strings.Split(tb.String(), "\n") {
		if strings.HasPrefix(strings.TrimSpace(l), "1 ") {
			last = l
		}
	}
	if !strings.Contains(last, "INFEASIBLE") || !strings.Contains(last, "—") || strings.Contains(last, "0.00") {
		t.Errorf("infeasible row %q: want — cells and INFEASIBLE, no zeros", last)
	}
	var cb bytes.Buffer
	if err := SweepCSV(&cb, axes, []*pb.SweepPoint{ok, bad}, false); err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(&cb).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	h, r := rows[0], rows[2]
	for i, name := range h {
		if name == "outage_probability" && r[i] != "" {
			t.Errorf("infeasible CSV row has outage_probability %q, want empty", r[i])
		}
		if name == "feasible" && r[i] != "false" {
			t.Errorf("feasible = %q, want false", r[i])
		}
	}
	g := plots.ObjectiveGrid{Objective: "outage (%)", StepDB: []float64{0.5, 1}, UpdateRateHz: []float64{1500},
		Value: [][]float64{{0, 0}}, Infeasible: [][]bool{{true, true}}, LowerIsBetter: true}
	if _, err := plots.HeatMap("all infeasible", g); err != nil {
		t.Errorf("heat map of infeasible cells: %v", err)
	}
}
