package main

import (
	"strings"

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

// tuneKindsHelp names what each drawable kind needs, for refusals.
const tuneKindsHelp = "heatmap needs exactly the axes " + stepPath + " and " + ratePath +
	", steps " + stepPath + " as the only axis, axis any one axis (e.g. layout.handover.window_db)"

// autoTunePlot is the kind auto draws for these axes: heatmap for step ×
// update rate, steps for the step alone, axis for any other single axis
// (a layout's handover window, a delay, ...); "" when no kind can draw them.
func autoTunePlot(axes []*pb.SweepAxis) string {
	paths := tuneAxisPaths(axes)
	switch {
	case len(axes) == 2 && paths[stepPath] == 1 && paths[ratePath] == 1:
		return "heatmap"
	case len(axes) == 1 && paths[stepPath] == 1:
		return "steps"
	case len(axes) == 1:
		return "axis"
	}
	return ""
}

// tuneKind resolves --plot's kind (auto to the one it draws).
func tuneKind(ps plotSpec, axes []*pb.SweepAxis) (string, error) {
	if ps.kind != "auto" {
		return ps.kind, nil
	}
	k := autoTunePlot(axes)
	if k == "" {
		var ps2 []string
		for _, a := range axes {
			ps2 = append(ps2, a.GetPath())
		}
		return "", badInputf("--plot %s: no plot kind draws the axes %s (%s); give the axes one of them needs or leave --plot out",
			ps.file, strings.Join(ps2, " × "), tuneKindsHelp)
	}
	return k, nil
}

// checkTunePlot rejects, before any work, a plot the axes cannot give.
func checkTunePlot(ps plotSpec, axes []*pb.SweepAxis) error {
	kind, err := tuneKind(ps, axes)
	if err != nil {
		return err
	}
	paths := tuneAxisPaths(axes)
	switch kind {
	case "heatmap":
		if len(axes) != 2 || paths[stepPath] != 1 || paths[ratePath] != 1 {
			return badInputf("--plot heatmap=%s needs exactly the axes %s and %s (%s)", ps.file, stepPath, ratePath, tuneKindsHelp)
		}
	case "steps":
		if len(axes) != 1 || paths[stepPath] != 1 {
			return badInputf("--plot steps=%s needs %s as the only axis (%s)", ps.file, stepPath, tuneKindsHelp)
		}
	case "axis":
		if len(axes) != 1 {
			return badInputf("--plot axis=%s needs exactly one axis, got %d (%s)", ps.file, len(axes), tuneKindsHelp)
		}
	}
	return nil
}

// plotTune draws one plot of a recommendation; kind is the resolved kind
// (tuneKind).
func plotTune(ps plotSpec, kind, title string, rec *pb.Recommendation) error {
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
		fig, err = plots.StepSensitivity("Outage and SIR error std against step size per condition — "+title, ls)
	case "axis":
		ls, path, ok := render.TuneAxisLines(rec)
		if !ok {
			return badInputf("--plot axis=%s needs exactly one axis", ps.file)
		}
		fig, err = plots.AxisSensitivity("Outage and SIR error std against "+path+" per condition — "+title, render.AxisTitle(path), ls)
	default:
		return badInputf("unknown plot kind %q", kind)
	}
	if err != nil {
		return err
	}
	return fig.Save(ps.file)
}
