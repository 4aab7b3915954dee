package main

import (
	"fmt"
	"github.com/fadeloop/fadeloop/loop/tune"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"github.com/fadeloop/fadeloop/client/plots"
	"github.com/fadeloop/fadeloop/client/render"
	htmlreport "github.com/fadeloop/fadeloop/client/report"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// plotSpec is one --plot: a kind and a file.
type plotSpec struct {
	kind string
	file string
}

// plotList is the repeatable --plot [KIND=]FILE flag.
type plotList []plotSpec

func (p *plotList) String() string {
	var s []string
	for _, x := range *p {
		s = append(s, x.kind+"="+x.file)
	}
	return strings.Join(s, ",")
}

func (p *plotList) Set(v string) error {
	kind, file, ok := strings.Cut(v, "=")
	if !ok {
		kind, file = "", v
	}
	if _, err := plots.FormatOf(file); err != nil {
		return err
	}
	*p = append(*p, plotSpec{kind: kind, file: file})
	return nil
}

// check fills the default kind and rejects kinds the command cannot draw.
func (p plotList) check(def string, allowed ...string) error {
	for i := range p {
		if p[i].kind == "" {
			p[i].kind = def
		}
		if !slices.Contains(allowed, p[i].kind) {
			// "default" stands for a kind the command picks later (run:
			// traces or map); it is not one to type.
			named := slices.DeleteFunc(slices.Clone(allowed), func(k string) bool { return k == "default" })
			return badInputf("--plot %s=%s: unknown plot kind %q for this command (kinds: %s)",
				p[i].kind, p[i].file, p[i].kind, strings.Join(named, ", "))
		}
	}
	return nil
}

func (p plotList) needs(kinds ...string) bool {
	for _, x := range p {
		if slices.Contains(kinds, x.kind) {
			return true
		}
	}
	return false
}

func (p plotList) onlyTraces() bool {
	for _, x := range p {
		if x.kind != "traces" {
			return false
		}
	}
	return true
}

// plotRun draws one plot of a run report.
func plotRun(ps plotSpec, rep *pb.RunReport, users []int32) error {
	title := rep.GetNormalisedScenario().GetName()
	if title == "" {
		title = "fadeloop run"
	}
	var (
		fig *plots.Figure
		err error
	)
	switch ps.kind {
	case "traces":
		fig, err = plots.Traces("Traces — "+title, render.RunTraces(rep, users))
	case "cdf":
		fig, err = plots.SIRErrorCDF("SIR error distribution per distance bin — "+title, render.RunBinErrors(rep))
	case "map", "map-power":
		fig, err = layoutMap(title, ps.kind, rep)
	case "distance":
		minP, maxP := math.NaN(), math.NaN()
		if il := rep.GetNormalisedScenario().GetInnerLoop(); il != nil {
			minP, maxP = il.GetMinPowerDbm(), il.GetMaxPowerDbm()
		}
		fig, err = plots.PowerVsDistance("Tx power against distance — "+title, render.RunDistancePoints(rep), minP, maxP, "5th–95th percentile")
	default:
		return fmt.Errorf("unknown plot kind %q", ps.kind)
	}
	if err != nil {
		return err
	}
	return fig.Save(ps.file)
}

// sweepObjective is the quantity a sweep heat map shows: a figure (its
// label and scale from client/render), lower is better; abs shows its
// magnitude.
type sweepObjective struct {
	key   string
	lower bool
	abs   bool
}

var sweepObjectives = map[string]sweepObjective{
	"std":    {"sir_error_std_db", true, false},
	"outage": {"outage_probability", true, false},
	"power":  {"tx_power_mean_dbm", true, false},
	"bler":   {"bler_target_error", true, true},
}

// label is the heat map's title of the objective: the figure's label,
// "|…|" around its name for a magnitude.
func (o sweepObjective) label() string {
	l := render.MustFigure(o.key).Label
	if o.abs {
		if i := strings.LastIndex(l, " ("); i > 0 {
			return "|" + l[:i] + "|" + l[i:]
		}
	}
	return l
}

const (
	stepPath = tune.StepPath
	ratePath = tune.RatePath
)

func axisLabel(a *pb.SweepAxis, v float64) string { return render.AxisValueLabel(a.GetPath(), v) }

// checkSweepPlot rejects, before any work, a plot the axes cannot give
// (layout: the base scenario is multi-cell).
func checkSweepPlot(ps plotSpec, axes []*pb.SweepAxis, layout bool) error {
	kind := ps.kind
	if kind == "auto" {
		kind = render.AutoSweepPlot(axes, layout)
		if kind == "" {
			return badInputf("--plot %s: no automatic plot for a multi-cell sweep over %d axes; use --plot layout=FILE with one or two axes", ps.file, len(axes))
		}
	}
	paths := map[string]int{}
	for _, a := range axes {
		paths[a.GetPath()]++
	}
	switch kind {
	case "layout":
		if len(axes) < 1 || len(axes) > 2 {
			return badInputf("--plot layout=%s needs one or two axes (x, then one line per value of the second)", ps.file)
		}
	case "steps":
		if paths[stepPath] != 1 || len(axes) > 2 {
			return badInputf("--plot steps=%s needs the axis %s and at most one other axis (one line per value)", ps.file, stepPath)
		}
	case "heatmap":
		if paths[stepPath] != 1 || paths[ratePath] != 1 || len(axes) != 2 {
			return badInputf("--plot heatmap=%s needs exactly the axes %s and %s", ps.file, stepPath, ratePath)
		}
	}
	return nil
}

// plotSweep draws one plot of a finished sweep (points sorted by index).
func plotSweep(ps plotSpec, title string, axes []*pb.SweepAxis, pts []*pb.SweepPoint, objective string) error {
	kind := ps.kind
	if kind == "auto" {
		kind = render.AutoSweepPlot(axes, len(pts) > 0 && pts[0].GetReport().GetLayout() != nil)
	}
	var (
		fig *plots.Figure
		err error
	)
	switch kind {
	case "layout":
		fig, err = layoutSweepFigure(title, axes, pts)
	case "cdf":
		ds := render.SweepErrorDistributions(axes, pts)
		if len(ds) > 8 {
			return badInputf("a cdf plot shows at most 8 candidates; this sweep has %d points (use --points or fewer values)", len(ds))
		}
		fig, err = plots.SIRErrorCDF("SIR error distribution per candidate — "+title, ds)
	case "steps":
		ls, ok := render.SweepStepLines(axes, pts)
		if !ok {
			return badInputf("a steps plot needs the axis %s and at most one other axis (one line per value)", stepPath)
		}
		fig, err = plots.StepSensitivity("Outage and SIR error std against step size — "+title, ls)
	case "heatmap":
		obj, ok := sweepObjectives[objective]
		if !ok {
			return badInputf("--objective %q: must be one of std, outage, power, bler", objective)
		}
		g, ok := render.SweepHeatGrid(axes, pts, obj.key, obj.abs)
		if !ok {
			return badInputf("a heatmap plot needs exactly the axes %s and %s", stepPath, ratePath)
		}
		g.Objective, g.LowerIsBetter = obj.label(), obj.lower
		fig, err = plots.HeatMap(obj.label()+" over step × update rate — "+title, g)
	default:
		return badInputf("unknown plot kind %q", kind)
	}
	if err != nil {
		return err
	}
	fig.NoIntervalsBecause(render.SweepNoIntervalReason(pts))
	return fig.Save(ps.file)
}

// checkReportPath rejects, before any work, a --report FILE that is not
// an .html file.
func checkReportPath(path string) error {
	if path == "" {
		return nil
	}
	if !strings.EqualFold(filepath.Ext(path), ".html") && !strings.EqualFold(filepath.Ext(path), ".htm") {
		return badInputf("--report %s: the report is an HTML page; name it FILE.html", path)
	}
	return nil
}

// writeResultReport writes the HTML report of a result (client/report) to
// path (see writeReportFile) and says so unless --quiet.
func writeResultReport(e *env, path string, in htmlreport.Input) error {
	if path == "" {
		return nil
	}
	if err := writeReportFile(path, in); err != nil {
		return err
	}
	if !e.g.quiet {
		fmt.Fprintf(e.stderr, "wrote report to %s\n", path)
	}
	return nil
}

// writeReportFile writes the HTML report into a temporary file beside path,
// renamed into place when complete, so a failed write never leaves half a
// page. It is the one writer of --report for every command.
func writeReportFile(path string, in htmlreport.Input) error {
	in.Created = time.Now()
	tmp, err := os.CreateTemp(filepath.Dir(path), ".fadeloop-report-*.html")
	if err != nil {
		return fmt.Errorf("--report %s: %w", path, err)
	}
	defer os.Remove(tmp.Name())
	if err := htmlreport.Write(tmp, in); err != nil {
		tmp.Close()
		return fmt.Errorf("--report %s: %w", path, err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("--report %s: %w", path, err)
	}
	if err := os.Chmod(tmp.Name(), 0o644); err != nil {
		return fmt.Errorf("--report %s: %w", path, err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("--report %s: %w", path, err)
	}
	return nil
}
