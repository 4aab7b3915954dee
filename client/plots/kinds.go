package plots

import (
	"errors"
	"fmt"
	"image/color"
	"math"
	"sort"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// ErrNoData is returned when a figure would have nothing to draw.
var ErrNoData = errors.New("nothing to plot")

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
