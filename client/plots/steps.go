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
// condition: StepSensitivity for an axis other than the step. With more
// than one line each line is shifted slightly in x (dodge) so that error
// bars at the same x stay apart; the ticks stay at the true values. With
// one line there is no legend entry for it.
func AxisSensitivity(title, xLabel string, lines []StepLine) (*Figure, error) {
	left := newPanel("Outage", xLabel, "outage (%)")
	right := newPanel("SIR error std", xLabel, "SIR error std (dB)")
	used, all, offs := dodgeLines(len(lines), func(i int) []float64 { return lines[i].StepDB })
	if len(used) == 0 {
		return nil, ErrNoData
	}
	named := len(used) > 1
	marked := false
	bars := 0
	for k, i := range used {
		ln := lines[i]
		x := shifted(ln.StepDB, offs[k])
		nb, err := addLinePoints(left, i, ln.Label, named, x, ln.OutagePct, ln.OutageLowPct, ln.OutageHighPct)
		if err != nil {
			return nil, err
		}
		bars += nb
		if nb, err = addLinePoints(right, i, ln.Label, named, x, ln.ErrorStdDB, ln.ErrorStdLowDB, ln.ErrorStdHighDB); err != nil {
			return nil, err
		}
		bars += nb
		if len(ln.Recommended) == len(ln.StepDB) {
			var xo, yo, xs, ys []float64
			for k, m := range ln.Recommended {
				if m && k < len(ln.OutagePct) && k < len(ln.ErrorStdDB) {
					xo, yo = append(xo, x[k]), append(yo, ln.OutagePct[k])
					xs, ys = append(xs, x[k]), append(ys, ln.ErrorStdDB[k])
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
						// The legend's sample is a smaller ring that fits
						// its row.
						pr.p.legend("recommended", glyphThumb{draw.GlyphStyle{Shape: draw.RingGlyph{}, Radius: vg.Points(6), Color: color.Black}})
					}
				}
				marked = true
			}
		}
	}
	left.Y.Min = math.Min(left.Y.Min, 0)
	// Head room above the data for the legend.
	for _, p := range []*panel{left, right} {
		p.Y.Max += 0.25 * (p.Y.Max - p.Y.Min)
	}
	left.X.Tick.Marker = valueTicks(all)
	right.X.Tick.Marker = valueTicks(all)
	f := &Figure{Title: title, panels: [][]*plot.Plot{{left.done(), right.done()}}, intervals: true, bars: bars}
	f.NoIntervalsBecause("")
	return f, nil
}

// dodgeFraction is the x shift between neighbouring lines as a fraction of
// the x range (1.5 %: bars 1.2 pt wide stay apart on a 400 pt panel, and the
// shift stays well below the spacing of the tick values).
const dodgeFraction = 0.015

// dodgeLines lists the lines (of n) that have x values (x(i)), all their
// x values in order, and the x shift of each of them (dodge over all).
func dodgeLines(n int, x func(i int) []float64) (used []int, all, offs []float64) {
	for i := 0; i < n; i++ {
		if xs := x(i); len(xs) > 0 {
			used = append(used, i)
			all = append(all, xs...)
		}
	}
	return used, all, dodge(len(used), all)
}

// dodge returns the x shift of each of n lines over x values xs: centred on
// 0, dodgeFraction of the x range (or of the value's magnitude, or 1, for
// one distinct x) apart; all zero for one line.
func dodge(n int, xs []float64) []float64 {
	offs := make([]float64, n)
	if n < 2 || len(xs) == 0 {
		return offs
	}
	lo, hi := slices.Min(xs), slices.Max(xs)
	span := hi - lo
	if !(span > 0) {
		span = math.Max(math.Abs(lo), 1)
	}
	d := dodgeFraction * span
	for k := range offs {
		offs[k] = (float64(k) - float64(n-1)/2) * d
	}
	return offs
}

// shifted returns x + off, element by element (a new slice).
func shifted(x []float64, off float64) []float64 {
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = v + off
	}
	return out
}

// glyphThumb is a legend sample drawn as one glyph in the middle of its
// box.
type glyphThumb struct{ sty draw.GlyphStyle }

func (g glyphThumb) Thumbnail(c *draw.Canvas) {
	c.DrawGlyph(g.sty, c.Center())
}

// addLinePoints draws one line with markers and its error bars where a
// point has an interval (NaN bounds: none), with a legend entry when named;
// it returns the number of error bars drawn.
func addLinePoints(p *panel, i int, label string, named bool, x, y, lo, hi []float64) (int, error) {
	if len(y) != len(x) {
		return 0, nil
	}
	pts := xy(x, y)
	l, s, err := plotter.NewLinePoints(pts)
	if err != nil {
		return 0, fmt.Errorf("%s: %w", label, err)
	}
	l.Color = seriesColor(i)
	l.Dashes = seriesDash(i)
	l.Width = vg.Points(2)
	s.Color = seriesColor(i)
	s.Shape = shapes[i%len(shapes)]
	s.Radius = vg.Points(4)
	p.Add(l, s)
	if named {
		p.legend(label, l, s)
	}
	if len(lo) == len(x) && len(hi) == len(x) {
		// A point without an interval (NaN bounds: e.g. withheld for a
		// one-replication layout run too short for one) gets no bar.
		e := make(errPoints, 0, len(x))
		for k := range x {
			if finite(lo[k]) && finite(hi[k]) && finite(y[k]) {
				e = append(e, errPoint{x: x[k], y: y[k], lo: y[k] - lo[k], hi: hi[k] - y[k]})
			}
		}
		if len(e) == 0 {
			return 0, nil
		}
		bars, err := plotter.NewYErrorBars(e)
		if err != nil {
			return 0, fmt.Errorf("%s: %w", label, err)
		}
		bars.Color = seriesColor(i)
		bars.Width = vg.Points(1.2)
		p.Add(bars)
		return len(e), nil
	}
	return 0, nil
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
