package main

import (
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
	var (
		fig *plots.Figure
		err error
	)
	switch kind {
	case "heatmap":
		g, ok := render.TuneObjectiveGrid(rec)
		if !ok {
			return badInputf("--plot heatmap=%s needs exactly the axes %s and %s", ps.file, stepPath, ratePath)
		}
		fig, err = plots.HeatMap(g.Objective+" over step × update rate — "+title, g)
	case "steps":
		ls, ok := render.TuneStepLines(rec)
		if !ok {
			return badInputf("--plot steps=%s needs %s as the only axis", ps.file, stepPath)
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
