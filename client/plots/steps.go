package plots

import (
	"fmt"
	"image/color"
	"math"
	"slices"
	"sort"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// StepSensitivity: outage and SIR error std against step size.

// StepLine is one speed's (or condition's) results across inner-loop step
// sizes: outage probability in percent and SIR error standard deviation in
// dB at each step (dB). Optional *Low / *High slices (same length) give the
// 95 % confidence interval drawn as error bars; a point whose bounds are
// NaN (no interval) has no bar.
type StepLine struct {
	Label          string
	StepDB         []float64
	OutagePct      []float64
	OutageLowPct   []float64
	OutageHighPct  []float64
	ErrorStdDB     []float64
	ErrorStdLowDB  []float64
	ErrorStdHighDB []float64
	// Recommended, when set (same length as StepDB), marks the points of
	// the recommended setting with a ring in both panels.
	Recommended []bool
}

// Add appends one point: the step in dB, the outage probability as a
// fraction (0..1) with its interval, and the SIR error std in dB with its
// interval; outage is stored in per cent.
func (l *StepLine) Add(stepDB, outage, outageLow, outageHigh, stdDB, stdLowDB, stdHighDB float64) {
	l.StepDB = append(l.StepDB, stepDB)
	l.OutagePct = append(l.OutagePct, 100*outage)
	l.OutageLowPct = append(l.OutageLowPct, 100*outageLow)
	l.OutageHighPct = append(l.OutageHighPct, 100*outageHigh)
	l.ErrorStdDB = append(l.ErrorStdDB, stdDB)
	l.ErrorStdLowDB = append(l.ErrorStdLowDB, stdLowDB)
	l.ErrorStdHighDB = append(l.ErrorStdHighDB, stdHighDB)
}

// SortByStep orders the points by step size (stable), every column with
// them; it builds new slices, so a copy of l keeps the old order.
func (l *StepLine) SortByStep() {
	idx := make([]int, len(l.StepDB))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return l.StepDB[idx[a]] < l.StepDB[idx[b]] })
	perm := func(v []float64) []float64 {
		if len(v) != len(idx) {
			return v
		}
		out := make([]float64, len(v))
		for i, j := range idx {
			out[i] = v[j]
		}
		return out
	}
	l.StepDB, l.OutagePct, l.OutageLowPct, l.OutageHighPct = perm(l.StepDB), perm(l.OutagePct), perm(l.OutageLowPct), perm(l.OutageHighPct)
	l.ErrorStdDB, l.ErrorStdLowDB, l.ErrorStdHighDB = perm(l.ErrorStdDB), perm(l.ErrorStdLowDB), perm(l.ErrorStdHighDB)
	if len(l.Recommended) == len(idx) {
		rec := make([]bool, len(idx))
		for i, j := range idx {
			rec[i] = l.Recommended[j]
		}
		l.Recommended = rec
	}
}

// StepSensitivity draws outage (left) and SIR error std (right) against the
// inner-loop step size, one line per speed.
func StepSensitivity(title string, lines []StepLine) (*Figure, error) {
	return AxisSensitivity(title, "step size (dB)", lines)
}

// AxisSensitivity draws outage (left) and SIR error std (right) against any
// one numeric axis (the lines' StepDB column holds its values, xLabel names
// it with its unit, e.g. "handover window (dB)"), one line per speed or
// condition: StepSensitivity for an axis other than the step.
func AxisSensitivity(title, xLabel string, lines []StepLine) (*Figure, error) {
	left := newPanel("Outage", xLabel, "outage (%)")
	right := newPanel("SIR error std", xLabel, "SIR error std (dB)")
	n := 0
	marked := false
	for i, ln := range lines {
		if len(ln.StepDB) == 0 {
			continue
		}
		if err := addLinePoints(left, i, ln.Label, ln.StepDB, ln.OutagePct, ln.OutageLowPct, ln.OutageHighPct); err != nil {
			return nil, err
		}
		if err := addLinePoints(right, i, ln.Label, ln.StepDB, ln.ErrorStdDB, ln.ErrorStdLowDB, ln.ErrorStdHighDB); err != nil {
			return nil, err
		}
		if len(ln.Recommended) == len(ln.StepDB) {
			var xo, yo, xs, ys []float64
			for k, m := range ln.Recommended {
				if m && k < len(ln.OutagePct) && k < len(ln.ErrorStdDB) {
					xo, yo = append(xo, ln.StepDB[k]), append(yo, ln.OutagePct[k])
					xs, ys = append(xs, ln.StepDB[k]), append(ys, ln.ErrorStdDB[k])
				}
			}
			if len(xo) > 0 {
				for _, pr := range []struct {
					p    *panel
					x, y []float64
				}{{left, xo, yo}, {right, xs, ys}} {
					sc, err := plotter.NewScatter(xy(pr.x, pr.y))
					if err != nil {
						return nil, err
					}
					sc.Shape = draw.RingGlyph{}
					sc.Radius = vg.Points(9)
					sc.Color = color.Black
					pr.p.Add(sc)
					if !marked {
						pr.p.legend("recommended", sc)
					}
				}
				marked = true
			}
		}
		n++
	}
	if n == 0 {
		return nil, ErrNoData
	}
	left.Y.Min = math.Min(left.Y.Min, 0)
	// Head room above the data for the legend.
	for _, p := range []*panel{left, right} {
		p.Y.Max += 0.25 * (p.Y.Max - p.Y.Min)
	}
	var all []float64
	for _, ln := range lines {
		all = append(all, ln.StepDB...)
	}
	left.X.Tick.Marker = valueTicks(all)
	right.X.Tick.Marker = valueTicks(all)
	return &Figure{Title: title, panels: [][]*plot.Plot{{left.done(), right.done()}}}, nil
}

func addLinePoints(p *panel, i int, label string, x, y, lo, hi []float64) error {
	if len(y) != len(x) {
		return nil
	}
	pts := xy(x, y)
	l, s, err := plotter.NewLinePoints(pts)
	if err != nil {
		return fmt.Errorf("%s: %w", label, err)
	}
	l.Color = seriesColor(i)
	l.Dashes = seriesDash(i)
	l.Width = vg.Points(2)
	s.Color = seriesColor(i)
	s.Shape = shapes[i%len(shapes)]
	s.Radius = vg.Points(4)
	p.Add(l, s)
	p.legend(label, l, s)
	if len(lo) == len(x) && len(hi) == len(x) {
		// A point without an interval (NaN bounds: e.g. withheld for a
		// one-replication layout run too short for one) gets no bar.
		e := make(errPoints, 0, len(x))
		for k := range x {
			if finite(lo[k]) && finite(hi[k]) {
				e = append(e, errPoint{x: x[k], y: y[k], lo: y[k] - lo[k], hi: hi[k] - y[k]})
			}
		}
		if len(e) == 0 {
			return nil
		}
		bars, err := plotter.NewYErrorBars(e)
		if err != nil {
			return fmt.Errorf("%s: %w", label, err)
		}
		bars.Color = seriesColor(i)
		bars.Width = vg.Points(1.2)
		p.Add(bars)
	}
	return nil
}

// valueTicks puts a labelled tick at each distinct value.
func valueTicks(vals []float64) plot.Ticker {
	v := slices.Clone(vals)
	slices.Sort(v)
	v = slices.Compact(v)
	return plot.TickerFunc(func(_, _ float64) []plot.Tick {
		t := make([]plot.Tick, len(v))
		for i, x := range v {
			t[i] = plot.Tick{Value: x, Label: strconv.FormatFloat(x, 'g', 4, 64)}
		}
		return t
	})
}

// finite reports whether v is neither NaN nor infinite.
func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
