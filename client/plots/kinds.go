package plots

import (
	"errors"
	"fmt"
	"image/color"
	"math"
	"slices"
	"sort"
	"strconv"

	"gonum.org/v1/gonum/stat/distuv"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/palette"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// ErrNoData is returned when a figure would have nothing to draw.
var ErrNoData = errors.New("nothing to plot")

// Quantile is one point of a distribution: the probability P (0..1) that the
// quantity is at most ValueDB (dB).
type Quantile struct {
	P       float64
	ValueDB float64
}

// ErrorDistribution is the SIR error (measured SIR minus SIR target, dB) of
// one candidate setting, either as raw samples (SamplesDB, drawn as the
// empirical CDF) or as quantile points (drawn as a piecewise-linear CDF
// through them). If both are given the samples win.
type ErrorDistribution struct {
	Label     string
	SamplesDB []float64
	Quantiles []Quantile
}

// SIRErrorCDF draws one cumulative distribution of the SIR error per
// candidate: x is the SIR error in dB, y the probability that the error is at
// most x, on a normal-probability (probit) scale from 0.5 % to 99.5 %, so
// that a Gaussian error is a straight line and the tails that make outage
// are spread out. Quantile inputs are drawn as marked points joined by
// lines. A steep, centred line is a loop that tracks; a shallow one is a
// loop that cannot follow the fading or adds its own step noise.
func SIRErrorCDF(title string, ds []ErrorDistribution) (*Figure, error) {
	p := newPanel(title, "SIR error = SIR − target (dB)", "P(SIR error ≤ x), normal probability scale")
	p.Y.Min, p.Y.Max = probitLow, probitHigh
	p.Y.Scale = probitScale{}
	p.Y.Tick.Marker = probitTicks{}
	p.Legend.Left = true
	n := 0
	for i, d := range ds {
		pts := cdfPoints(d)
		if len(pts) == 0 {
			continue
		}
		// The scale ends at 0.5 % and 99.5 %: the empirical CDF's steps
		// beyond are left out, quantiles pinned to the edge.
		if len(d.SamplesDB) > 0 {
			pts = slices.DeleteFunc(pts, func(q plotter.XY) bool { return q.Y < probitLow || q.Y > probitHigh })
			if len(pts) == 0 {
				continue
			}
		}
		for k := range pts {
			pts[k].Y = math.Min(math.Max(pts[k].Y, probitLow), probitHigh)
		}
		l, err := plotter.NewLine(pts)
		if err != nil {
			return nil, fmt.Errorf("candidate %q: %w", d.Label, err)
		}
		l.Color = seriesColor(i)
		l.Dashes = seriesDash(i)
		l.Width = vg.Points(2)
		p.Add(l)
		if len(d.SamplesDB) == 0 {
			sc, err := plotter.NewScatter(pts)
			if err != nil {
				return nil, err
			}
			sc.Color = seriesColor(i)
			sc.Shape = shapes[i%len(shapes)]
			sc.Radius = vg.Points(4)
			p.Add(sc)
			p.legend(d.Label, l, sc)
		} else {
			p.legend(d.Label, l)
		}
		n++
	}
	if n == 0 {
		return nil, ErrNoData
	}
	p.Add(vline{x: 0, c: color.Gray{Y: 90}})
	return &Figure{Title: title, panels: [][]*plot.Plot{{p.done()}}}, nil
}

// Range of the probability axis of SIRErrorCDF.
const (
	probitLow  = 0.005
	probitHigh = 0.995
)

// probitScale maps a probability to its standard normal quantile
// (normal probability paper).
type probitScale struct{}

func (probitScale) Normalize(lo, hi, x float64) float64 {
	q := func(v float64) float64 {
		return distuv.UnitNormal.Quantile(math.Min(math.Max(v, 1e-9), 1-1e-9))
	}
	return (q(x) - q(lo)) / (q(hi) - q(lo))
}

// probitTicks labels the usual probabilities of a normal probability plot.
type probitTicks struct{}

func (probitTicks) Ticks(lo, hi float64) []plot.Tick {
	var t []plot.Tick
	for _, v := range []float64{0.01, 0.02, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 0.95, 0.98, 0.99} {
		if v >= lo && v <= hi {
			t = append(t, plot.Tick{Value: v, Label: strconv.FormatFloat(v, 'g', 3, 64)})
		}
	}
	return t
}

func cdfPoints(d ErrorDistribution) plotter.XYs {
	if len(d.SamplesDB) > 0 {
		s := make([]float64, 0, len(d.SamplesDB))
		for _, v := range d.SamplesDB {
			if !math.IsNaN(v) && !math.IsInf(v, 0) {
				s = append(s, v)
			}
		}
		sort.Float64s(s)
		if len(s) == 0 {
			return nil
		}
		// Thin to at most ~2000 steps so the vector output stays small.
		stride := max(1, len(s)/2000)
		pts := make(plotter.XYs, 0, 2*len(s)/stride+2)
		prev := 0.0
		for i := 0; i < len(s); i += stride {
			f := float64(i+1) / float64(len(s))
			pts = append(pts, plotter.XY{X: s[i], Y: prev}, plotter.XY{X: s[i], Y: f})
			prev = f
		}
		pts = append(pts, plotter.XY{X: s[len(s)-1], Y: 1})
		return pts
	}
	q := slices.Clone(d.Quantiles)
	q = slices.DeleteFunc(q, func(x Quantile) bool {
		return math.IsNaN(x.P) || math.IsNaN(x.ValueDB) || math.IsInf(x.ValueDB, 0)
	})
	sort.Slice(q, func(i, j int) bool { return q[i].P < q[j].P })
	pts := make(plotter.XYs, len(q))
	for i, x := range q {
		pts[i] = plotter.XY{X: x.ValueDB, Y: x.P}
	}
	return pts
}

// Trace is the decimated time series of one user: time in seconds and, at
// each time, the SIR seen by the receiver (dB), the SIR target (dB) and the
// transmit power (dBm). All slices have the same length.
type Trace struct {
	Label      string
	TimeS      []float64
	SIRDB      []float64
	TargetDB   []float64
	TxPowerDBM []float64
}

// MaxTraceUsers is the most users one traces figure shows; further users
// are left out (the caller chooses which users to show).
const MaxTraceUsers = 4

// Traces draws, for each chosen user (at most MaxTraceUsers), a row with the
// SIR and its target (left) and the transmit power (right) against time.
func Traces(title string, ts []Trace) (*Figure, error) {
	var rows [][]*plot.Plot
	for _, t := range ts {
		if len(rows) == MaxTraceUsers {
			break
		}
		if len(t.TimeS) == 0 {
			continue
		}
		i := len(rows)
		left := newPanel(t.Label+": SIR", "time (s)", "SIR (dB)")
		right := newPanel(t.Label+": Tx power", "time (s)", "Tx power (dBm)")
		left.Legend.Left = true
		if len(t.SIRDB) == len(t.TimeS) {
			l, err := plotter.NewLine(xy(t.TimeS, t.SIRDB))
			if err != nil {
				return nil, fmt.Errorf("%s SIR: %w", t.Label, err)
			}
			l.Color = seriesColor(i)
			l.Width = vg.Points(1)
			left.Add(l)
			left.legend("SIR", l)
		}
		if len(t.TargetDB) == len(t.TimeS) {
			l, err := plotter.NewLine(xy(t.TimeS, t.TargetDB))
			if err != nil {
				return nil, fmt.Errorf("%s target: %w", t.Label, err)
			}
			l.Color = color.Black
			l.Width = vg.Points(2.5)
			l.Dashes = []vg.Length{vg.Points(8), vg.Points(4)}
			left.Add(l)
			left.legend("SIR target", l)
		}
		if len(t.TxPowerDBM) == len(t.TimeS) {
			l, err := plotter.NewLine(xy(t.TimeS, t.TxPowerDBM))
			if err != nil {
				return nil, fmt.Errorf("%s Tx power: %w", t.Label, err)
			}
			l.Color = seriesColor(i)
			l.Width = vg.Points(1.5)
			right.Add(l)
		}
		rows = append(rows, []*plot.Plot{left.done(), right.done()})
	}
	if len(rows) == 0 {
		return nil, ErrNoData
	}
	return &Figure{Title: title, panels: rows}, nil
}

// StepLine is one speed's (or condition's) results across inner-loop step
// sizes: outage probability in percent and SIR error standard deviation in
// dB at each step (dB). Optional *Low / *High slices (same length) give the
// 95 % confidence interval drawn as error bars.
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
	left := newPanel("Outage", "step size (dB)", "outage (%)")
	right := newPanel("SIR error spread", "step size (dB)", "SIR error std (dB)")
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
		e := make(errPoints, len(x))
		for k := range x {
			e[k] = errPoint{x: x[k], y: y[k], lo: y[k] - lo[k], hi: hi[k] - y[k]}
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

var shapes = []draw.GlyphDrawer{
	draw.CircleGlyph{}, draw.SquareGlyph{}, draw.TriangleGlyph{}, draw.PyramidGlyph{},
	draw.RingGlyph{}, draw.BoxGlyph{}, draw.CrossGlyph{}, draw.PlusGlyph{},
}

type errPoint struct{ x, y, lo, hi float64 }
type errPoints []errPoint

func (e errPoints) Len() int                    { return len(e) }
func (e errPoints) XY(i int) (float64, float64) { return e[i].x, e[i].y }
func (e errPoints) YError(i int) (float64, float64) {
	return math.Max(0, e[i].lo), math.Max(0, e[i].hi)
}

// ObjectiveGrid is a tuning objective over a step × update-rate grid.
// Value[r][c] is the objective at UpdateRateHz[r] and StepDB[c] (NaN where
// the point was not run). Objective names the quantity with its unit, e.g.
// "SIR error std (dB)"; LowerIsBetter marks the best cell as the minimum
// (otherwise the maximum).
type ObjectiveGrid struct {
	Objective     string
	StepDB        []float64
	UpdateRateHz  []float64
	Value         [][]float64
	LowerIsBetter bool
	// Marked outlines the cell at MarkRow (update rate index) and MarkCol
	// (step index) with the legend MarkLabel (e.g. "recommended") instead
	// of the cell with the best value: a tuning decision's recommended
	// setting, which inside a tie or under unmet constraints need not be
	// the best value.
	Marked           bool
	MarkRow, MarkCol int
	MarkLabel        string
	// Infeasible[r][c] marks a cell whose load the scenario's interference
	// equation cannot carry: it is drawn grey with the word "infeasible"
	// instead of a number and is never the best cell (nil: none).
	Infeasible [][]bool
}

// infeasible reports whether cell (r, c) is marked infeasible.
func (g ObjectiveGrid) infeasible(r, c int) bool {
	return r < len(g.Infeasible) && c < len(g.Infeasible[r]) && g.Infeasible[r][c]
}

// HeatMap draws the objective over the step × update-rate grid, each cell
// coloured and printed with its value, the best cell outlined, and a colour
// bar at the right.
func HeatMap(title string, g ObjectiveGrid) (*Figure, error) {
	nc, nr := len(g.StepDB), len(g.UpdateRateHz)
	if nc == 0 || nr == 0 || len(g.Value) != nr {
		return nil, ErrNoData
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	bestR, bestC := -1, -1
	for r := range g.Value {
		if len(g.Value[r]) != nc {
			return nil, fmt.Errorf("heat map row %d has %d values, want %d", r, len(g.Value[r]), nc)
		}
		for c, v := range g.Value[r] {
			if math.IsNaN(v) || math.IsInf(v, 0) || g.infeasible(r, c) {
				continue
			}
			lo, hi = math.Min(lo, v), math.Max(hi, v)
			if bestR < 0 || (g.LowerIsBetter && v < g.Value[bestR][bestC]) ||
				(!g.LowerIsBetter && v > g.Value[bestR][bestC]) {
				bestR, bestC = r, c
			}
		}
	}
	if bestR < 0 {
		if len(g.Infeasible) == 0 {
			return nil, ErrNoData
		}
		lo, hi = 0, 1 // every cell infeasible: grey cells, no best cell
	}
	if hi == lo {
		hi = lo + 1
	}
	var cmap palette.ColorMap = moreland.SmoothBlueRed()
	if !g.LowerIsBetter {
		cmap = reversed{cmap}
	}
	cmap.SetMin(lo)
	cmap.SetMax(hi)
	const ncolors = 64
	shown := g
	if len(g.Infeasible) > 0 {
		shown.Value = make([][]float64, nr)
		for r := range g.Value {
			shown.Value[r] = slices.Clone(g.Value[r])
			for c := range shown.Value[r] {
				if g.infeasible(r, c) {
					shown.Value[r][c] = math.NaN()
				}
			}
		}
	}
	hm := plotter.NewHeatMap(gridXYZ{shown}, cmap.Palette(ncolors))
	hm.Min, hm.Max = lo, hi
	hm.NaN = color.Gray{Y: 235}

	p := newPanel(title, "inner-loop step (dB)", "update rate (Hz)")
	p.Add(hm)
	var labels plotter.XYLabels
	for r := range g.Value {
		for c, v := range g.Value[r] {
			s := "—"
			switch {
			case g.infeasible(r, c):
				s = "infeasible"
			case !math.IsNaN(v):
				s = cellText(v)
			}
			labels.XYs = append(labels.XYs, plotter.XY{X: float64(c), Y: float64(r)})
			labels.Labels = append(labels.Labels, s)
		}
	}
	lb, err := plotter.NewLabels(labels)
	if err != nil {
		return nil, err
	}
	for i := range lb.TextStyle {
		lb.TextStyle[i].Font.Size = labelSize
		lb.TextStyle[i].XAlign = draw.XCenter
		lb.TextStyle[i].YAlign = draw.YCenter
		lb.TextStyle[i].Color = color.Black
	}
	p.Add(lb)
	markLabel := "best"
	if g.Marked && g.MarkRow >= 0 && g.MarkRow < nr && g.MarkCol >= 0 && g.MarkCol < nc {
		bestR, bestC = g.MarkRow, g.MarkCol
		markLabel = g.MarkLabel
		if markLabel == "" {
			markLabel = "marked"
		}
	}
	if bestR >= 0 {
		p.Add(cellOutline{c: float64(bestC), r: float64(bestR)})
		p.legend(markLabel, cellOutline{})
	}
	p.X.Tick.Marker = indexTicks(g.StepDB)
	p.Y.Tick.Marker = indexTicks(g.UpdateRateHz)
	p.X.Min, p.X.Max = -0.5, float64(nc)-0.5
	p.Y.Min, p.Y.Max = -0.5, float64(nr)-0.5

	bar := plot.New()
	bar.Title.Text = g.Objective
	bar.Title.TextStyle.Font.Size = tickSize
	bar.Y.Tick.Label.Font.Size = tickSize
	bar.HideX()
	bar.Add(&plotter.ColorBar{ColorMap: cmap, Vertical: true, Colors: ncolors})
	return &Figure{Title: title, panels: [][]*plot.Plot{{p.done()}}, side: bar}, nil
}

type reversed struct{ palette.ColorMap }

func (r reversed) At(v float64) (color.Color, error) {
	return r.ColorMap.At(r.Max() - (v - r.Min()))
}
func (r reversed) Palette(n int) palette.Palette {
	p := r.ColorMap.Palette(n).Colors()
	q := make([]color.Color, len(p))
	for i := range p {
		q[i] = p[len(p)-1-i]
	}
	return simplePalette(q)
}

type simplePalette []color.Color

func (p simplePalette) Colors() []color.Color { return p }

type gridXYZ struct{ g ObjectiveGrid }

func (g gridXYZ) Dims() (c, r int)   { return len(g.g.StepDB), len(g.g.UpdateRateHz) }
func (g gridXYZ) Z(c, r int) float64 { return g.g.Value[r][c] }
func (g gridXYZ) X(c int) float64    { return float64(c) }
func (g gridXYZ) Y(r int) float64    { return float64(r) }

// indexTicks labels integer positions 0..n-1 with the grid's real values.
func indexTicks(vals []float64) plot.Ticker {
	return plot.TickerFunc(func(_, _ float64) []plot.Tick {
		t := make([]plot.Tick, len(vals))
		for i, v := range vals {
			t[i] = plot.Tick{Value: float64(i), Label: strconv.FormatFloat(v, 'g', 4, 64)}
		}
		return t
	})
}

// cellOutline draws a thick black square around grid cell (c, r).
type cellOutline struct{ c, r float64 }

func (o cellOutline) Plot(c draw.Canvas, p *plot.Plot) {
	tx, ty := p.Transforms(&c)
	x0, x1 := tx(o.c-0.5), tx(o.c+0.5)
	y0, y1 := ty(o.r-0.5), ty(o.r+0.5)
	sty := draw.LineStyle{Color: color.Black, Width: vg.Points(3.5)}
	c.StrokeLines(sty, []vg.Point{{X: x0, Y: y0}, {X: x1, Y: y0}, {X: x1, Y: y1}, {X: x0, Y: y1}, {X: x0, Y: y0}})
}

func (o cellOutline) Thumbnail(c *draw.Canvas) {
	sty := draw.LineStyle{Color: color.Black, Width: vg.Points(3)}
	m := vg.Points(2)
	r := c.Rectangle
	c.StrokeLines(sty, []vg.Point{{X: r.Min.X + m, Y: r.Min.Y + m}, {X: r.Max.X - m, Y: r.Min.Y + m},
		{X: r.Max.X - m, Y: r.Max.Y - m}, {X: r.Min.X + m, Y: r.Max.Y - m}, {X: r.Min.X + m, Y: r.Min.Y + m}})
}

// DistancePoint is one user's (or one distance bin's) transmit power: mean
// and a low / high percentile (dBm) at its distance from the receiver (m).
type DistancePoint struct {
	Group      string
	DistanceM  float64
	TxMeanDBM  float64
	TxLowDBM   float64
	TxHighDBM  float64
	HasPercent bool // TxLowDBM / TxHighDBM are set
}

// PowerVsDistance draws the transmit power of each user against its
// distance (log scale), one marker style per group, with the percentile
// range as error bars and the maximum transmit power as a dashed line
// and the minimum as a dotted line (minPowerDBM, maxPowerDBM; NaN to omit
// either). Far users pinned at the maximum and near users pinned at the
// minimum are the near-far limits of the cell.
func PowerVsDistance(title string, pts []DistancePoint, minPowerDBM, maxPowerDBM float64, percentileLabel string) (*Figure, error) {
	p := newPanel(title, "distance from receiver (m)", "Tx power (dBm)")
	p.X.Scale = plot.LogScale{}
	p.X.Tick.Marker = logTicks125{}
	p.Legend.Left = true
	groups := []string{}
	byGroup := map[string][]DistancePoint{}
	for _, d := range pts {
		if !(d.DistanceM > 0) || math.IsNaN(d.TxMeanDBM) {
			continue
		}
		if _, ok := byGroup[d.Group]; !ok {
			groups = append(groups, d.Group)
		}
		byGroup[d.Group] = append(byGroup[d.Group], d)
	}
	if len(groups) == 0 {
		return nil, ErrNoData
	}
	xmin, xmax := math.Inf(1), math.Inf(-1)
	for i, g := range groups {
		ds := byGroup[g]
		sort.Slice(ds, func(a, b int) bool { return ds[a].DistanceM < ds[b].DistanceM })
		xyz := make(plotter.XYs, len(ds))
		var e errPoints
		for k, d := range ds {
			xyz[k] = plotter.XY{X: d.DistanceM, Y: d.TxMeanDBM}
			xmin, xmax = math.Min(xmin, d.DistanceM), math.Max(xmax, d.DistanceM)
			if d.HasPercent {
				e = append(e, errPoint{x: d.DistanceM, y: d.TxMeanDBM, lo: d.TxMeanDBM - d.TxLowDBM, hi: d.TxHighDBM - d.TxMeanDBM})
			}
		}
		s, err := plotter.NewScatter(xyz)
		if err != nil {
			return nil, fmt.Errorf("group %q: %w", g, err)
		}
		s.Color = seriesColor(i)
		s.Shape = shapes[i%len(shapes)]
		s.Radius = vg.Points(4.5)
		p.Add(s)
		p.legend(g+" (mean)", s)
		if len(e) > 0 {
			bars, err := plotter.NewYErrorBars(e)
			if err != nil {
				return nil, fmt.Errorf("group %q: %w", g, err)
			}
			bars.Color = seriesColor(i)
			bars.Width = vg.Points(1)
			p.Add(bars)
		}
	}
	if len(pts) > 0 && percentileLabel != "" {
		p.Title.Text = title + " — bars: " + percentileLabel
	}
	if !math.IsNaN(maxPowerDBM) && !math.IsInf(maxPowerDBM, 0) {
		l, err := plotter.NewLine(plotter.XYs{{X: xmin / 1.3, Y: maxPowerDBM}, {X: xmax * 1.3, Y: maxPowerDBM}})
		if err != nil {
			return nil, err
		}
		l.Color = color.RGBA{200, 0, 0, 255}
		l.Width = vg.Points(2)
		l.Dashes = []vg.Length{vg.Points(8), vg.Points(4)}
		p.Add(l)
		p.legend("max Tx power", l)
	}
	if !math.IsNaN(minPowerDBM) && !math.IsInf(minPowerDBM, 0) {
		l, err := plotter.NewLine(plotter.XYs{{X: xmin / 1.3, Y: minPowerDBM}, {X: xmax * 1.3, Y: minPowerDBM}})
		if err != nil {
			return nil, err
		}
		l.Color = color.RGBA{60, 60, 160, 255}
		l.Width = vg.Points(2)
		l.Dashes = []vg.Length{vg.Points(2), vg.Points(4)}
		p.Add(l)
		p.legend("min Tx power", l)
		p.Y.Min = math.Min(p.Y.Min, minPowerDBM-3)
	}
	p.X.Min, p.X.Max = xmin/1.3, xmax*1.3
	if !math.IsNaN(maxPowerDBM) && !math.IsInf(maxPowerDBM, 0) {
		p.Y.Max = math.Max(p.Y.Max, maxPowerDBM+3)
	}
	return &Figure{Title: title, panels: [][]*plot.Plot{{p.done()}}}, nil
}

func xy(x, y []float64) plotter.XYs {
	pts := make(plotter.XYs, 0, len(x))
	for i := range x {
		if math.IsNaN(y[i]) || math.IsInf(y[i], 0) {
			continue
		}
		pts = append(pts, plotter.XY{X: x[i], Y: y[i]})
	}
	return pts
}

// vline is a thin vertical reference line at x across the whole panel.
type vline struct {
	x float64
	c color.Color
}

func (v vline) Plot(c draw.Canvas, p *plot.Plot) {
	if v.x < p.X.Min || v.x > p.X.Max {
		return
	}
	tx, _ := p.Transforms(&c)
	x := tx(v.x)
	c.StrokeLine2(draw.LineStyle{Color: v.c, Width: vg.Points(1)}, x, c.Min.Y, x, c.Max.Y)
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

// logTicks125 labels 1, 2 and 5 × 10^k on a log axis, with minor ticks at
// the other integers.
type logTicks125 struct{}

func (logTicks125) Ticks(lo, hi float64) []plot.Tick {
	if !(lo > 0) || !(hi > lo) {
		return nil
	}
	var t []plot.Tick
	for e := math.Floor(math.Log10(lo)); e <= math.Ceil(math.Log10(hi)); e++ {
		base := math.Pow(10, e)
		for m := 1; m <= 9; m++ {
			v := float64(m) * base
			if v < lo || v > hi {
				continue
			}
			tk := plot.Tick{Value: v}
			if m == 1 || m == 2 || m == 5 {
				tk.Label = strconv.FormatFloat(v, 'g', 6, 64)
			}
			t = append(t, tk)
		}
	}
	return t
}

// cellText prints a heat-map value with two decimals below 10, one below
// 100 and none above.
func cellText(v float64) string {
	switch a := math.Abs(v); {
	case a < 10:
		return strconv.FormatFloat(v, 'f', 2, 64)
	case a < 100:
		return strconv.FormatFloat(v, 'f', 1, 64)
	}
	return strconv.FormatFloat(v, 'f', 0, 64)
}
