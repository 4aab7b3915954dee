package plots

import (
	"fmt"
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/palette"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// MapCell is one cell of a multi-cell layout: its site position in m and,
// for a sector, its boresight (degrees anticlockwise from +x).
type MapCell struct {
	Name         string
	SiteXM       float64
	SiteYM       float64
	Sector       bool
	BoresightDeg float64
}

// MapUser is one user: position in m and the value it is coloured by.
type MapUser struct {
	XM, YM float64
	Value  float64
}

// LayoutMapData is what LayoutMap draws: the cells, the users, the
// inter-site distance D (each site's hexagon has apothem D/2), and the name
// and unit of the users' colour value.
type LayoutMapData struct {
	Cells              []MapCell
	Users              []MapUser
	InterSiteDistanceM float64
	ValueLabel         string // e.g. "outage (%)"
}

// LayoutMap draws a hexagonal layout to scale: each site's hexagon, the
// site (black triangle) with a short line along each sector's boresight,
// and every user as a dot coloured by its value (blue low, red high) with a
// colour bar at the right. x and y are in km with equal scales.
func LayoutMap(title string, d LayoutMapData) (*Figure, error) {
	if len(d.Users) == 0 || len(d.Cells) == 0 || !(d.InterSiteDistanceM > 0) {
		return nil, ErrNoData
	}
	const km = 1000.0
	D := d.InterSiteDistanceM / km
	p := newPanel(title, "x (km)", "y (km)")
	p.Legend.Left = true

	// Hexagons and sites.
	seen := map[[2]float64]bool{}
	var sites plotter.XYs
	xmin, xmax, ymin, ymax := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
	var hexLine *plotter.Line
	for _, c := range d.Cells {
		sx, sy := c.SiteXM/km, c.SiteYM/km
		key := [2]float64{sx, sy}
		if !seen[key] {
			seen[key] = true
			sites = append(sites, plotter.XY{X: sx, Y: sy})
			r := D / math.Sqrt(3)
			hex := make(plotter.XYs, 7)
			for k := range hex {
				a := (30 + 60*float64(k)) * math.Pi / 180
				hex[k] = plotter.XY{X: sx + r*math.Cos(a), Y: sy + r*math.Sin(a)}
				xmin, xmax = math.Min(xmin, hex[k].X), math.Max(xmax, hex[k].X)
				ymin, ymax = math.Min(ymin, hex[k].Y), math.Max(ymax, hex[k].Y)
			}
			l, err := plotter.NewLine(hex)
			if err != nil {
				return nil, err
			}
			l.Color = color.Gray{Y: 110}
			l.Width = vg.Points(1.2)
			p.Add(l)
			hexLine = l
		}
		if c.Sector {
			a := c.BoresightDeg * math.Pi / 180
			l, err := plotter.NewLine(plotter.XYs{{X: sx, Y: sy}, {X: sx + D/4*math.Cos(a), Y: sy + D/4*math.Sin(a)}})
			if err != nil {
				return nil, err
			}
			l.Color = color.Black
			l.Width = vg.Points(2)
			p.Add(l)
		}
	}
	if hexLine != nil {
		p.legend("site hexagon", hexLine)
	}

	// Users coloured by value.
	lo, hi := math.Inf(1), math.Inf(-1)
	var pts plotter.XYs
	var vals []float64
	for _, u := range d.Users {
		if math.IsNaN(u.Value) || math.IsInf(u.Value, 0) {
			continue
		}
		pts = append(pts, plotter.XY{X: u.XM / km, Y: u.YM / km})
		vals = append(vals, u.Value)
		lo, hi = math.Min(lo, u.Value), math.Max(hi, u.Value)
	}
	if len(pts) == 0 {
		return nil, ErrNoData
	}
	if hi == lo {
		hi = lo + 1
	}
	var cmap palette.ColorMap = moreland.SmoothBlueRed()
	cmap.SetMin(lo)
	cmap.SetMax(hi)
	sc, err := plotter.NewScatter(pts)
	if err != nil {
		return nil, err
	}
	sc.GlyphStyleFunc = func(i int) draw.GlyphStyle {
		c, err := cmap.At(vals[i])
		if err != nil {
			c = color.Gray{Y: 128}
		}
		return draw.GlyphStyle{Color: c, Radius: vg.Points(3.2), Shape: draw.CircleGlyph{}}
	}
	p.Add(sc)
	p.legend(fmt.Sprintf("user (%d), coloured by %s", len(pts), d.ValueLabel), sc)

	st, err := plotter.NewScatter(sites)
	if err != nil {
		return nil, err
	}
	st.Shape = draw.PyramidGlyph{}
	st.Color = color.Black
	st.Radius = vg.Points(6)
	p.Add(st)
	p.legend("site (lines: sector boresights)", st)

	// Equal scales: the plot area is about 1.4 times wider than high.
	cx, cy := (xmin+xmax)/2, (ymin+ymax)/2
	w, h := (xmax-xmin)*1.04, (ymax-ymin)*1.15
	if w/h < 1.4 {
		w = 1.4 * h
	} else {
		h = w / 1.4
	}
	p.X.Min, p.X.Max = cx-w/2, cx+w/2
	p.Y.Min, p.Y.Max = cy-h/2, cy+h*0.5
	p.Y.Max += h * 0.1 // room for the legend

	bar := plot.New()
	bar.Title.Text = d.ValueLabel
	bar.Title.TextStyle.Font.Size = tickSize
	bar.Y.Tick.Label.Font.Size = tickSize
	bar.HideX()
	bar.Add(&plotter.ColorBar{ColorMap: cmap, Vertical: true, Colors: 64})
	return &Figure{Title: title, panels: [][]*plot.Plot{{p.done()}}, side: bar}, nil
}

// LayoutLine is one line of LayoutSweep: the other-cell interference ratio
// f and the outage with their 95 % intervals at each x (NaN bounds: no
// interval, no bar; e.g. one replication too short for one).
type LayoutLine struct {
	Label                            string
	X                                []float64
	F, FLow, FHigh                   []float64
	OutagePct, OutageLow, OutageHigh []float64
}

// LayoutSweep draws the multi-cell figures of a sweep against one axis
// (e.g. the handover window or the inner-loop step): the measured
// other-cell to own-cell interference ratio f (left) and the outage
// (right), one line per value of a second axis, with 95 % intervals.
func LayoutSweep(title, xLabel string, lines []LayoutLine) (*Figure, error) {
	left := newPanel("Other-cell / own-cell interference f", xLabel, "f (linear)")
	right := newPanel("Outage", xLabel, "outage (%)")
	n := 0
	var all []float64
	for i, ln := range lines {
		if len(ln.X) == 0 {
			continue
		}
		if err := addLinePoints(left, i, ln.Label, ln.X, ln.F, ln.FLow, ln.FHigh); err != nil {
			return nil, err
		}
		if err := addLinePoints(right, i, ln.Label, ln.X, ln.OutagePct, ln.OutageLow, ln.OutageHigh); err != nil {
			return nil, err
		}
		all = append(all, ln.X...)
		n++
	}
	if n == 0 {
		return nil, ErrNoData
	}
	for _, p := range []*panel{left, right} {
		p.Y.Min = math.Min(p.Y.Min, 0)
		p.Y.Max += 0.25 * (p.Y.Max - p.Y.Min)
		p.X.Tick.Marker = valueTicks(all)
	}
	return &Figure{Title: title, panels: [][]*plot.Plot{{left.done(), right.done()}}}, nil
}
