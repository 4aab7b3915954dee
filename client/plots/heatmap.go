package plots

import (
	"fmt"
	"image/color"
	"math"
	"slices"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/palette"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// HeatMap: an objective over step size × update rate.

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

func (g gridXYZ) Dims() (c, r int) { return len(g.g.StepDB), len(g.g.UpdateRateHz) }

func (g gridXYZ) Z(c, r int) float64 { return g.g.Value[r][c] }

func (g gridXYZ) X(c int) float64 { return float64(c) }

func (g gridXYZ) Y(r int) float64 { return float64(r) }

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
