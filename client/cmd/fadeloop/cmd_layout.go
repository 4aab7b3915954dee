package main

import (
	_ "embed"
	"fmt"
	"strconv"

	"github.com/fadeloop/fadeloop/client/plots"
	"github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// multiCellScenarioYAML is the commented multi-cell example scenario
// (`fadeloop example --multi-cell`); testdata/scenarios/harbour_town.json is
// its protojson form.
//
//go:embed multicell.yaml
var multiCellScenarioYAML []byte

// multiCellScenarioName names it in messages.
const multiCellScenarioName = "built-in multi-cell example"

// layoutMap draws the map of a multi-cell report: users coloured by their
// outage (kind "map") or mean Tx power ("map-power").
func layoutMap(title, kind string, rep *pb.RunReport) (*plots.Figure, error) {
	power := kind == "map-power"
	d, err := render.LayoutMapData(rep, power)
	if err != nil {
		return nil, fmt.Errorf("--plot %s: %w", kind, err)
	}
	what := "outage"
	if power {
		what = "Tx power"
	}
	return plots.LayoutMap(title+" — users by "+what+" (replication 0, "+strconv.Itoa(len(d.Users))+" users)", d)
}

// layoutSweepFigure draws f and the outage of a multi-cell sweep against
// its first axis, one line per value of the second.
func layoutSweepFigure(title string, axes []*pb.SweepAxis, pts []*pb.SweepPoint) (*plots.Figure, error) {
	ls, ok := render.SweepLayoutLines(axes, pts)
	if !ok {
		if len(axes) < 1 || len(axes) > 2 {
			return nil, badInputf("a layout plot needs one or two axes")
		}
		return nil, badInputf("--plot layout needs a multi-cell scenario (layout.sites set)")
	}
	x := axes[0].GetPath()
	return plots.LayoutSweep("Multi-cell figures against "+x+" — "+title, render.AxisTitle(x), ls)
}
