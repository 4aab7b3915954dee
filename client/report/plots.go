package report

import (
	"bytes"
	"fmt"
	"html/template"
	"math"
	"strconv"
	"strings"

	"github.com/fadeloop/fadeloop/client/plots"
	clirender "github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// The figures of a report are the same as the CLI's --plot figures, drawn
// by client/plots from the API messages.

// figure is one inline SVG plot with its caption.
type figure struct {
	Caption string
	SVG     template.HTML
}

// svgOf encodes fig as SVG and strips the XML prolog so that it can sit in
// HTML; the SVG keeps its viewBox, so CSS can scale it to the page width.
func svgOf(fig *plots.Figure) (template.HTML, error) {
	var b bytes.Buffer
	if err := fig.Encode(&b, "svg"); err != nil {
		return "", err
	}
	s := b.String()
	if i := strings.Index(s, "<svg"); i >= 0 {
		s = s[i:]
	}
	// Scale to the container: width/height in pt would fix the size.
	s = strings.Replace(s, `<svg width="`, `<svg role="img" class="plot" data-width="`, 1)
	s = strings.Replace(s, `" height="`, `" data-height="`, 1)
	return template.HTML(s), nil // #nosec: produced by gonum/plot's SVG canvas from numbers and our labels, escaped by it
}

// addFigure draws fig (or skips it when there is nothing to draw).
func addFigure(out *[]figure, caption string, fig *plots.Figure, err error) error {
	if err == plots.ErrNoData || (err == nil && fig == nil) {
		return nil
	}
	if err != nil {
		return fmt.Errorf("plot %q: %w", caption, err)
	}
	svg, err := svgOf(fig)
	if err != nil {
		return fmt.Errorf("plot %q: %w", caption, err)
	}
	*out = append(*out, figure{Caption: caption, SVG: svg})
	return nil
}

// titled joins a plot title and the scenario name (when there is one).
func titled(what, name string) string {
	if name == "" {
		return what
	}
	return what + " — " + name
}

// runFigures: traces (when the report has them), the SIR error
// distribution per distance bin, and Tx power against distance; for a
// multi-cell run (no percentiles, no distance bins) the map of the layout
// with its users by outage.
func runFigures(rep *pb.RunReport) ([]figure, error) {
	title := rep.GetNormalisedScenario().GetName()
	var out []figure
	if rep.GetLayout() != nil {
		d, err := clirender.LayoutMapData(rep, false)
		if err != nil {
			return nil, err
		}
		fig, err := plots.LayoutMap("Users by outage (replication 0, "+strconv.Itoa(len(d.Users))+" users)", d)
		if err := addFigure(&out, "The layout to scale: sites, sector boresights, cells named as in the per-cell table, and each user of replication 0, its marker shape by its group and its colour by its outage.", fig, err); err != nil {
			return nil, err
		}
		return out, nil
	}
	if len(rep.GetTraces()) > 0 {
		fig, err := plots.Traces(titled("Traces", title), runTraces(rep))
		if err := addFigure(&out, "SIR, SIR target and Tx power against time for the nearest, the median and the farthest traced user.", fig, err); err != nil {
			return nil, err
		}
	}
	fig, err := plots.SIRErrorCDF(titled("SIR error distribution per distance bin", title), runBinErrors(rep))
	if err := addFigure(&out, "Distribution of the SIR error (SIR − target) per distance bin, on a normal-probability scale.", fig, err); err != nil {
		return nil, err
	}
	if len(rep.GetUsers()) > 0 {
		minP, maxP := math.NaN(), math.NaN()
		if il := rep.GetNormalisedScenario().GetInnerLoop(); il != nil {
			minP, maxP = il.GetMinPowerDbm(), il.GetMaxPowerDbm()
		}
		fig, err := plots.PowerVsDistance(titled("Tx power against distance", title), runDistancePoints(rep), minP, maxP, "5th–95th percentile")
		if err := addFigure(&out, "Mean Tx power of each user against its distance, with the 5th–95th percentile range and the power limits.", fig, err); err != nil {
			return nil, err
		}
	}
	return out, nil
}

func groupName(sc *pb.Scenario, g int32) string {
	if gs := sc.GetGroups(); g >= 0 && int(g) < len(gs) && gs[g].GetName() != "" {
		return gs[g].GetName()
	}
	return "group " + strconv.Itoa(int(g))
}

// runTraces, runBinErrors and runDistancePoints are the CLI's
// plot inputs (client/render), so a report draws what --plot draws.
func runTraces(rep *pb.RunReport) []plots.Trace { return clirender.RunTraces(rep, nil) }

func runBinErrors(rep *pb.RunReport) []plots.ErrorDistribution { return clirender.RunBinErrors(rep) }

func runDistancePoints(rep *pb.RunReport) []plots.DistancePoint {
	return clirender.RunDistancePoints(rep)
}

// sweepFigures: a heat map of outage over step × update rate, outage and
// SIR error std against step size (one line per value of the other axis),
// f and outage against the axis for a multi-cell sweep, or the SIR error
// distribution per point (at most 8 points).
func sweepFigures(title string, axes []*pb.SweepAxis, pts []*pb.SweepPoint) ([]figure, error) {
	var out []figure
	layout := len(pts) > 0 && pts[0].GetReport().GetLayout() != nil
	switch kind := clirender.AutoSweepPlot(axes, layout); {
	case kind == "layout":
		ls, _ := clirender.SweepLayoutLines(axes, pts)
		x := axes[0].GetPath()
		// The page heading names the scenario; the axis path is long
		// enough for the figure's title.
		fig, err := plots.LayoutSweep("Multi-cell figures against "+x, clirender.AxisTitle(x), ls)
		fig.NoIntervalsBecause(clirender.SweepNoIntervalReason(pts))
		if err := addFigure(&out, "f (other-cell / own-cell interference) and outage of the layout against "+x+", with their 95 % intervals where the runs give them.", fig, err); err != nil {
			return nil, err
		}
	case kind == "heatmap":
		g, _ := clirender.SweepHeatGrid(axes, pts, "outage_probability", false)
		fig, err := plots.HeatMap(titled(g.Objective+" over step × update rate", title), g)
		if err := addFigure(&out, "Outage of every grid point over inner-loop step size and update rate; the best cell is outlined.", fig, err); err != nil {
			return nil, err
		}
	case kind == "steps":
		ls, _ := clirender.SweepStepLines(axes, pts)
		fig, err := plots.StepSensitivity(titled("Outage and SIR error std against step size", title), ls)
		fig.NoIntervalsBecause(clirender.SweepNoIntervalReason(pts))
		if err := addFigure(&out, "Outage and SIR error std against inner-loop step size, with their 95 % intervals.", fig, err); err != nil {
			return nil, err
		}
	case kind == "cdf" && len(pts) <= 8:
		ds := clirender.SweepErrorDistributions(axes, pts)
		fig, err := plots.SIRErrorCDF(titled("SIR error distribution per point", title), ds)
		if err := addFigure(&out, "Distribution of the SIR error of every grid point (from its reported percentiles).", fig, err); err != nil {
			return nil, err
		}
	}
	return out, nil
}

// tuneFigures: the objective over step × update rate (when those are the
// two axes), or outage and SIR error std against step size per condition
// (when the step size is the only axis).
func tuneFigures(title string, rec *pb.Recommendation) ([]figure, error) {
	var out []figure
	// The conversion lives in client/render (one home for the CLI's --plot
	// and this report); the recommended candidate is the marked one.
	if g, ok := clirender.TuneObjectiveGrid(rec); ok {
		fig, err := plots.HeatMap(titled(g.Objective+" over step × update rate", title), g)
		if err := addFigure(&out, "The ranked figure of every candidate over step size and update rate; the recommended setting is outlined.", fig, err); err != nil {
			return nil, err
		}
	} else if ls, ok := clirender.TuneStepLines(rec); ok {
		fig, err := plots.StepSensitivity(titled("Outage and SIR error std against step size per condition", title), ls)
		if err := addFigure(&out, fmt.Sprintf("Outage and SIR error std of every candidate per condition, with their %g %% intervals; the recommended setting of each condition is ringed.", 100*rec.GetConfidence()), fig, err); err != nil {
			return nil, err
		}
	}
	return out, nil
}

// objectiveUnit returns the display scale, decimals, unit and name of a
// recommendation's ranked figure: the API's label (client/render's when an
// older result lacks it).
func objectiveUnit(rec *pb.Recommendation) (scale float64, dec int, unit, name string) {
	l := clirender.SearchLabel(rec.GetFigures(), clirender.ObjectiveKey(rec.GetObjective().GetKind()))
	return l.GetDisplayScale(), int(l.GetDecimals()), l.GetUnit(), l.GetName()
}

// num formats v with dec decimals; NaN and ±Inf as "–".
func num(v float64, dec int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "–"
	}
	s := strconv.FormatFloat(v, 'f', dec, 64)
	if s == "-0" || strings.Trim(s, "-0.") == "" && strings.HasPrefix(s, "-") {
		s = s[1:]
	}
	return s
}
