package main

import (
	"math"
	"slices"

	"github.com/fadeloop/fadeloop/client/plots"
	"github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// tuneAxisPaths lists the paths of the axes.
func tuneAxisPaths(axes []*pb.SweepAxis) map[string]int {
	paths := map[string]int{}
	for _, a := range axes {
		paths[a.GetPath()]++
	}
	return paths
}

func autoTunePlot(axes []*pb.SweepAxis) string {
	paths := tuneAxisPaths(axes)
	if len(axes) == 2 && paths[stepPath] == 1 && paths[ratePath] == 1 {
		return "heatmap"
	}
	return "steps"
}

// checkTunePlot rejects, before any work, a plot the axes cannot give.
func checkTunePlot(ps plotSpec, axes []*pb.SweepAxis) error {
	kind := ps.kind
	if kind == "auto" {
		kind = autoTunePlot(axes)
	}
	paths := tuneAxisPaths(axes)
	switch kind {
	case "heatmap":
		if len(axes) != 2 || paths[stepPath] != 1 || paths[ratePath] != 1 {
			return badInputf("--plot heatmap=%s needs exactly the axes %s and %s", ps.file, stepPath, ratePath)
		}
	case "steps":
		if len(axes) != 1 || paths[stepPath] != 1 {
			return badInputf("--plot steps=%s needs %s as the only axis (one line per condition)", ps.file, stepPath)
		}
	}
	return nil
}

// plotTune draws one plot of a recommendation.
func plotTune(ps plotSpec, title string, axes []*pb.SweepAxis, rec *pb.Recommendation) error {
	kind := ps.kind
	if kind == "auto" {
		kind = autoTunePlot(axes)
	}
	if title == "" {
		title = "fadeloop tune"
	}
	cands := rec.GetCandidates()
	coord := func(k int32, path string) float64 {
		for _, c := range cands[k].GetCoords() {
			if c.GetPath() == path {
				return c.GetValue()
			}
		}
		return math.NaN()
	}
	var (
		fig *plots.Figure
		err error
	)
	switch kind {
	case "heatmap":
		scale, _, unit, name := render.ObjectiveUnit(rec.GetObjective().GetKind())
		var steps, rates []float64
		for i := range cands {
			steps = append(steps, coord(int32(i), stepPath))
			rates = append(rates, coord(int32(i), ratePath))
		}
		slices.Sort(steps)
		slices.Sort(rates)
		g := plots.ObjectiveGrid{Objective: name + " (" + unit + ")", StepDB: slices.Compact(steps),
			UpdateRateHz: slices.Compact(rates), LowerIsBetter: true}
		if len(rec.GetConditions()) > 1 {
			g.Objective = "weighted " + g.Objective
		}
		g.Value = make([][]float64, len(g.UpdateRateHz))
		for r := range g.Value {
			g.Value[r] = make([]float64, len(g.StepDB))
			for c := range g.Value[r] {
				g.Value[r][c] = math.NaN()
			}
		}
		for _, cr := range rec.GetOverallCandidates() {
			col := slices.Index(g.StepDB, coord(cr.GetCandidate(), stepPath))
			row := slices.Index(g.UpdateRateHz, coord(cr.GetCandidate(), ratePath))
			if col >= 0 && row >= 0 {
				g.Value[row][col] = scale * cr.GetObjective().GetMean()
			}
		}
		fig, err = plots.HeatMap(g.Objective+" over step × update rate — "+title, g)
	case "steps":
		var ls []plots.StepLine
		for _, c := range rec.GetConditions() {
			l := plots.StepLine{Label: c.GetName()}
			crs := slices.Clone(c.GetCandidates())
			slices.SortFunc(crs, func(a, b *pb.CandidateResult) int {
				return int(math.Copysign(1, coord(a.GetCandidate(), stepPath)-coord(b.GetCandidate(), stepPath)))
			})
			for _, cr := range crs {
				f := cr.GetFigures()
				o, s := f.GetOutageProbability(), f.GetSirErrorStdDb()
				l.Add(coord(cr.GetCandidate(), stepPath), o.GetMean(), o.GetLow(), o.GetHigh(), s.GetMean(), s.GetLow(), s.GetHigh())
			}
			ls = append(ls, l)
		}
		fig, err = plots.StepSensitivity("Outage and SIR error spread against step size per condition — "+title, ls)
	default:
		return badInputf("unknown plot kind %q", kind)
	}
	if err != nil {
		return err
	}
	return fig.Save(ps.file)
}
