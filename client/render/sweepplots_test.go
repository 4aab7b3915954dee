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
