package render

import (
	"math"
	"slices"
	"sort"
	"strings"

	"github.com/fadeloop/fadeloop/client/plots"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// The plot inputs of a sweep, for the CLI's --plot and the HTML report
// alike (one conversion of sweep points to plots).

// AutoSweepPlot picks a sweep's plot from its axes: "heatmap" for step ×
// update rate, "steps" for the step size and at most one other axis, else
// "cdf" — or, for a multi-cell sweep (layout), whose points have no SIR
// error percentiles, "layout" with one or two axes and "" (no plot) with
// more (the CLI's --plot auto and the HTML report).
func AutoSweepPlot(axes []*pb.SweepAxis, layout bool) string {
	paths := map[string]bool{}
	for _, a := range axes {
		paths[a.GetPath()] = true
	}
	switch {
	case len(axes) == 2 && paths[StepPath] && paths[RatePath]:
		return "heatmap"
	case paths[StepPath] && len(axes) <= 2:
		return "steps"
	case layout && len(axes) <= 2:
		return "layout"
	case layout:
		return ""
	}
	return "cdf"
}

// SweepNoIntervalReason is why a sweep's figures can lack 95 % intervals,
// for their subtitle (plots.Figure.NoIntervalsBecause): "1 replication"
// when every point ran a single replication (an interval then needs batch
// means over a long enough run), else "".
func SweepNoIntervalReason(pts []*pb.SweepPoint) string {
	for _, p := range pts {
		if p.GetReport().GetReplications() != 1 {
			return ""
		}
	}
	if len(pts) == 0 {
		return ""
	}
	return "1 replication"
}

// SweepLayoutLines is the layout-wide other-to-own ratio f and outage (%)
// with their 95 % intervals against the first axis, one line per value of
// the second (one line, "all", without one); ok is false unless there
// are one or two axes and every point is multi-cell.
func SweepLayoutLines(axes []*pb.SweepAxis, pts []*pb.SweepPoint) (ls []plots.LayoutLine, ok bool) {
	if len(axes) < 1 || len(axes) > 2 {
		return nil, false
	}
	lines := map[float64]*plots.LayoutLine{}
	var order []float64
	for _, p := range pts {
		l := p.GetReport().GetLayout()
		if l == nil {
			return nil, false
		}
		c := p.GetCoordinates()
		key, label := 0.0, "all"
		if len(axes) == 2 {
			key, label = c[1], AxisValueLabel(axes[1].GetPath(), c[1])
		}
		ln := lines[key]
		if ln == nil {
			ln = &plots.LayoutLine{Label: label}
			lines[key] = ln
			order = append(order, key)
		}
		f, o := l.GetOverall().GetOtherToOwn(), l.GetOverall().GetOutageProbability()
		ln.X = append(ln.X, c[0])
		ln.F, ln.FLow, ln.FHigh = append(ln.F, f.GetValue()), append(ln.FLow, f.GetCiLow()), append(ln.FHigh, f.GetCiHigh())
		ln.OutagePct = append(ln.OutagePct, 100*o.GetValue())
		ln.OutageLow = append(ln.OutageLow, 100*o.GetCiLow())
		ln.OutageHigh = append(ln.OutageHigh, 100*o.GetCiHigh())
	}
	sort.Float64s(order)
	for _, k := range order {
		ls = append(ls, *lines[k])
	}
	return ls, true
}

// SweepStepLines is outage and SIR error std with their 95 % intervals
// against the step size, one line per value of the other axis (one line,
// "all", without one); ok is false unless the axes are the step size and
// at most one other.
func SweepStepLines(axes []*pb.SweepAxis, pts []*pb.SweepPoint) (ls []plots.StepLine, ok bool) {
	si, oi := -1, -1
	for i, a := range axes {
		if a.GetPath() == StepPath {
			si = i
		} else {
			oi = i
		}
	}
	if si < 0 || len(axes) > 2 {
		return nil, false
	}
	lines := map[float64]*plots.StepLine{}
	var order []float64
	for _, p := range pts {
		c := p.GetCoordinates()
		key, label := 0.0, "all"
		if oi >= 0 {
			key, label = c[oi], AxisValueLabel(axes[oi].GetPath(), c[oi])
		}
		l := lines[key]
		if l == nil {
			l = &plots.StepLine{Label: label}
			lines[key] = l
			order = append(order, key)
		}
		f := p.GetReport().GetAggregate()
		o, s := f.GetOutageProbability(), f.GetSirErrorStdDb()
		l.Add(c[si], o.GetValue(), o.GetCiLow(), o.GetCiHigh(), s.GetValue(), s.GetCiLow(), s.GetCiHigh())
	}
	sort.Float64s(order)
	for _, k := range order {
		l := lines[k]
		l.SortByStep()
		ls = append(ls, *l)
	}
	return ls, true
}

// SweepHeatGrid is the figure key of every point over step size × update
// rate (in the figure's display scale; its magnitude with abs), infeasible
// points marked, lower is better; ok is false unless those are exactly the
// two axes. The grid's rows and columns are the points' coordinates, so
// axes given as ranges (expanded by the server) work too.
func SweepHeatGrid(axes []*pb.SweepAxis, pts []*pb.SweepPoint, key string, abs bool) (g plots.ObjectiveGrid, ok bool) {
	si, ri := -1, -1
	for i, a := range axes {
		switch a.GetPath() {
		case StepPath:
			si = i
		case RatePath:
			ri = i
		}
	}
	if si < 0 || ri < 0 || len(axes) != 2 {
		return g, false
	}
	f := MustFigure(key)
	g = plots.ObjectiveGrid{Objective: f.Label, LowerIsBetter: true}
	for _, p := range pts {
		g.StepDB = append(g.StepDB, p.GetCoordinates()[si])
		g.UpdateRateHz = append(g.UpdateRateHz, p.GetCoordinates()[ri])
	}
	slices.Sort(g.StepDB)
	slices.Sort(g.UpdateRateHz)
	g.StepDB, g.UpdateRateHz = slices.Compact(g.StepDB), slices.Compact(g.UpdateRateHz)
	g.Value = make([][]float64, len(g.UpdateRateHz))
	g.Infeasible = make([][]bool, len(g.UpdateRateHz))
	for r := range g.Value {
		g.Infeasible[r] = make([]bool, len(g.StepDB))
		g.Value[r] = make([]float64, len(g.StepDB))
		for c := range g.Value[r] {
			g.Value[r][c] = math.NaN()
		}
	}
	for _, p := range pts {
		c := p.GetCoordinates()
		col, row := slices.Index(g.StepDB, c[si]), slices.Index(g.UpdateRateHz, c[ri])
		v := f.Scale * f.Get(p.GetReport().GetAggregate()).GetValue()
		if abs {
			v = math.Abs(v)
		}
		g.Value[row][col] = v
		g.Infeasible[row][col] = p.GetReport().GetFeasibility().GetInfeasible()
	}
	return g, true
}

// SweepErrorDistributions is the SIR error distribution of every point,
// labelled by its axis values.
func SweepErrorDistributions(axes []*pb.SweepAxis, pts []*pb.SweepPoint) []plots.ErrorDistribution {
	var ds []plots.ErrorDistribution
	for _, p := range pts {
		var parts []string
		for i, a := range axes {
			if i < len(p.GetCoordinates()) {
				parts = append(parts, AxisValueLabel(a.GetPath(), p.GetCoordinates()[i]))
			}
		}
		ds = append(ds, plots.ErrorDistribution{Label: strings.Join(parts, ", "),
			Quantiles: Quantiles(p.GetReport().GetAggregate().GetSirErrorPercentilesDb())})
	}
	return ds
}
