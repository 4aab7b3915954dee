package plots

import (
	"fmt"
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// MapCell is one cell of a multi-cell layout: its name (as the per-cell
// table names it, e.g. "S0/1"), its site position in m and, for a sector,
// its boresight (degrees anticlockwise from +x).
type MapCell struct {
	Name         string
	SiteXM       float64
	SiteYM       float64
	Sector       bool
	BoresightDeg float64
}

// MapUser is one user: position in m, its group (index into
// LayoutMapData.GroupNames) and the value it is coloured by.
type MapUser struct {
	XM, YM float64
	Group  int
	Value  float64
}

// LayoutMapData is what LayoutMap draws: the cells, the users, the
// inter-site distance D (each site's hexagon has apothem D/2), the names
// of the user groups (legend entries; one marker shape per group) and the
// name and unit of the users' colour value.
type LayoutMapData struct {
	Cells              []MapCell
	Users              []MapUser
	GroupNames         []string
	InterSiteDistanceM float64
	ValueLabel         string // e.g. "outage (%)"
}

// ylOrRd is the ColorBrewer 9-class yellow–orange–red sequential scheme
// without its lightest class (common practice: a sequential scale for a
// quantity with an order and no natural centre; light is low, dark red is
// high).
var ylOrRd = []color.RGBA{
	{0xff, 0xed, 0xa0, 0xff}, {0xfe, 0xd9, 0x76, 0xff}, {0xfe, 0xb2, 0x4c, 0xff}, {0xfd, 0x8d, 0x3c, 0xff},
	{0xfc, 0x4e, 0x2a, 0xff}, {0xe3, 0x1a, 0x1c, 0xff}, {0xbd, 0x00, 0x26, 0xff}, {0x80, 0x00, 0x26, 0xff},
}

// sequential is the colour of t in [0, 1] (clamped) on ylOrRd, linear in
// sRGB between its classes.
func sequential(t float64) color.Color {
	t = math.Max(0, math.Min(1, t))
	x := t * float64(len(ylOrRd)-1)
	i := min(int(x), len(ylOrRd)-2)
	f := x - float64(i)
	a, b := ylOrRd[i], ylOrRd[i+1]
	mix := func(p, q uint8) uint8 { return uint8(math.Round(float64(p) + f*(float64(q)-float64(p)))) }
	return color.RGBA{mix(a.R, b.R), mix(a.G, b.G), mix(a.B, b.B), 0xff}
}

// marker is a filled polygon glyph with a dark outline, so that the
// shape stays readable whatever its fill colour: sides 0 is a circle.
type marker struct {
	sides int
	rot   float64 // rotation of the first vertex from +x, rad
}

// groupMarkers are the shapes of groups 0, 1, …: circle, square, diamond,
// triangle, inverted triangle, hexagon (then again).
var groupMarkers = []marker{{0, 0}, {4, math.Pi / 4}, {4, 0}, {3, math.Pi / 2}, {3, -math.Pi / 2}, {6, 0}}

func (m marker) DrawGlyph(c *draw.Canvas, sty draw.GlyphStyle, pt vg.Point) {
	var path vg.Path
	r := sty.Radius
	if m.sides == 0 {
		path.Move(vg.Point{X: pt.X + r, Y: pt.Y})
		path.Arc(pt, r, 0, 2*math.Pi)
	} else {
		r *= 1.15 // about the area of the circle
		for k := 0; k < m.sides; k++ {
			a := m.rot + 2*math.Pi*float64(k)/float64(m.sides)
			q := vg.Point{X: pt.X + r*vg.Length(math.Cos(a)), Y: pt.Y + r*vg.Length(math.Sin(a))}
			if k == 0 {
				path.Move(q)
			} else {
				path.Line(q)
			}
		}
	}
	path.Close()
	c.SetColor(sty.Color)
	c.Fill(path)
	c.SetLineStyle(draw.LineStyle{Color: color.Gray{Y: 40}, Width: vg.Points(0.7)})
	c.Stroke(path)
}

// mapLabels writes each text centred at its point (data units) on a
// light backdrop, so that it stays readable over lines and markers.
type mapLabels struct {
	at    plotter.XYs
	texts []string
	style draw.TextStyle
}

func (l *mapLabels) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	for i, t := range l.texts {
		pt := vg.Point{X: trX(l.at[i].X), Y: trY(l.at[i].Y)}
		if !c.Contains(pt) {
			continue
		}
		r := l.style.Rectangle(t)
		pad := vg.Points(1.5)
		box := vg.Rectangle{Min: vg.Point{X: pt.X + r.Min.X - pad, Y: pt.Y + r.Min.Y - pad}, Max: vg.Point{X: pt.X + r.Max.X + pad, Y: pt.Y + r.Max.Y + pad}}
		c.SetColor(color.NRGBA{255, 255, 255, 215})
		c.Fill(box.Path())
		c.FillText(l.style, pt, t)
	}
}

// colourStrip is a vertical colour bar from lo to hi drawn as filled
// bands (the same in PNG and SVG, unlike an embedded image).
type colourStrip struct{ lo, hi float64 }

func (s colourStrip) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	const n = 96
	for k := 0; k < n; k++ {
		a := s.lo + (s.hi-s.lo)*float64(k)/n
		b := s.lo + (s.hi-s.lo)*float64(k+1)/n
		top := trY(b) + vg.Points(1) // overlap the next band: no seams
		if k == n-1 {
			top = trY(b)
		}
		rect := vg.Rectangle{Min: vg.Point{X: trX(0), Y: trY(a)}, Max: vg.Point{X: trX(1), Y: top}}
		c.SetColor(sequential((a + b - 2*s.lo) / 2 / (s.hi - s.lo)))
		c.Fill(rect.Path())
	}
}

// niceRange widens [lo, hi] to the nearest major ticks of denseTicks.
func niceRange(lo, hi float64) (float64, float64) {
	var majors []float64
	for _, t := range (denseTicks{}).Ticks(lo, hi) {
		if t.Label != "" {
			majors = append(majors, t.Value)
		}
	}
	if len(majors) < 2 {
		return lo, hi
	}
	step := majors[1] - majors[0]
	return step * math.Floor(lo/step+1e-9), step * math.Ceil(hi/step-1e-9)
}

// LayoutMap draws a hexagonal layout to scale (x and y in km, one km the
// same length on both axes): each site's hexagon, the site (black
// triangle) with a short line along each sector's boresight, each cell's
// name (as the per-cell table names it) and every user as a marker whose
// shape is its group (legend by group name) and whose colour is its value
// on a sequential scale (light low, dark red high) with a colour bar at
// the right.
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
	labels := &mapLabels{style: p.X.Tick.Label}
	labels.style.Font.Size = vg.Points(9.5)
	labels.style.XAlign, labels.style.YAlign = draw.XCenter, draw.YCenter
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
		// The name beyond the end of the boresight line (sector) or below
		// the site (omnidirectional cell).
		at := plotter.XY{X: sx, Y: sy - D/7}
		if c.Sector {
			a := c.BoresightDeg * math.Pi / 180
			l, err := plotter.NewLine(plotter.XYs{{X: sx, Y: sy}, {X: sx + D/4*math.Cos(a), Y: sy + D/4*math.Sin(a)}})
			if err != nil {
				return nil, err
			}
			l.Color = color.Black
			l.Width = vg.Points(2)
			p.Add(l)
			at = plotter.XY{X: sx + 0.33*D*math.Cos(a), Y: sy + 0.33*D*math.Sin(a)}
		}
		if c.Name != "" {
			labels.at = append(labels.at, at)
			labels.texts = append(labels.texts, c.Name)
		}
	}
	if hexLine != nil {
		p.legend("site hexagon", hexLine)
	}

	// Users: shape by group, colour by value.
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, u := range d.Users {
		if !math.IsNaN(u.Value) && !math.IsInf(u.Value, 0) {
			lo, hi = math.Min(lo, u.Value), math.Max(hi, u.Value)
		}
	}
	if math.IsInf(lo, 0) {
		return nil, ErrNoData
	}
	if hi == lo {
		lo, hi = lo-0.5, hi+0.5
	}
	lo, hi = niceRange(lo, hi)
	groups := 0
	for _, u := range d.Users {
		groups = max(groups, u.Group+1)
	}
	for g := 0; g < groups; g++ {
		var pts plotter.XYs
		var vals []float64
		for _, u := range d.Users {
			if u.Group == g && !math.IsNaN(u.Value) && !math.IsInf(u.Value, 0) {
				pts = append(pts, plotter.XY{X: u.XM / km, Y: u.YM / km})
				vals = append(vals, u.Value)
			}
		}
		if len(pts) == 0 {
			continue
		}
		sc, err := plotter.NewScatter(pts)
		if err != nil {
			return nil, err
		}
		shape := groupMarkers[g%len(groupMarkers)]
		sc.GlyphStyle = draw.GlyphStyle{Color: color.Gray{Y: 190}, Radius: vg.Points(4), Shape: shape} // legend thumbnail
		sc.GlyphStyleFunc = func(i int) draw.GlyphStyle {
			return draw.GlyphStyle{Color: sequential((vals[i] - lo) / (hi - lo)), Radius: vg.Points(3.6), Shape: shape}
		}
		p.Add(sc)
		name := fmt.Sprintf("group %d", g)
		if g < len(d.GroupNames) && d.GroupNames[g] != "" {
			name = d.GroupNames[g]
		}
		p.legend(fmt.Sprintf("%s (%d users)", name, len(pts)), sc)
	}

	st, err := plotter.NewScatter(sites)
	if err != nil {
		return nil, err
	}
	st.Shape = draw.PyramidGlyph{}
	st.Color = color.Black
	st.Radius = vg.Points(6)
	p.Add(st)
	siteLabel := "site"
	for _, c := range d.Cells {
		if c.Sector {
			siteLabel = "site (lines: sector boresights)"
			break
		}
	}
	p.legend(siteLabel, st)
	p.Add(labels)

	// The layout with a margin and room at the top for the legend; the
	// figure then widens one axis so that a km is as long on both
	// (equalScales).
	w, h := xmax-xmin, ymax-ymin
	p.X.Min, p.X.Max = xmin-0.04*w, xmax+0.04*w
	p.Y.Min, p.Y.Max = ymin-0.04*h, ymax+(0.06+0.045*float64(len(p.box.entries)))*h

	bar := plot.New()
	bar.Title.Text = d.ValueLabel
	bar.Title.TextStyle.Font.Size = tickSize
	bar.Y.Tick.Label.Font.Size = tickSize
	bar.Y.Tick.Marker = denseTicks{}
	bar.HideX()
	bar.X.Min, bar.X.Max = 0, 1
	bar.Y.Min, bar.Y.Max = lo, hi
	bar.Add(colourStrip{lo, hi})
	return &Figure{Title: title, panels: [][]*plot.Plot{{p.done()}}, side: bar, equal: true}, nil
}

// equalScales widens the x or the y range of p about its centre so that
// one data unit is as long on both axes in the data area p gets in c
// (twice: the tick labels of the new range can change the area).
func equalScales(p *plot.Plot, c draw.Canvas) {
	for range 2 {
		da := p.DataCanvas(c)
		wPt, hPt := float64(da.Max.X-da.Min.X), float64(da.Max.Y-da.Min.Y)
		if !(wPt > 0 && hPt > 0) {
			return
		}
		xs, ys := (p.X.Max-p.X.Min)/wPt, (p.Y.Max-p.Y.Min)/hPt // data units per point
		if xs < ys {
			half := ys * wPt / 2
			cx := (p.X.Min + p.X.Max) / 2
			p.X.Min, p.X.Max = cx-half, cx+half
		} else {
			half := xs * hPt / 2
			cy := (p.Y.Min + p.Y.Max) / 2
			p.Y.Min, p.Y.Max = cy-half, cy+half
		}
	}
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
// (right), one line per value of a second axis, with 95 % intervals. Lines
// are dodged in x and a single line has no legend entry, as in
// AxisSensitivity.
func LayoutSweep(title, xLabel string, lines []LayoutLine) (*Figure, error) {
	left := newPanel("Other-cell / own-cell interference f", xLabel, "f")
	right := newPanel("Outage", xLabel, "outage (%)")
	used, all, offs := dodgeLines(len(lines), func(i int) []float64 { return lines[i].X })
	if len(used) == 0 {
		return nil, ErrNoData
	}
	bars := 0
	for k, i := range used {
		ln := lines[i]
		x := shifted(ln.X, offs[k])
		nb, err := addLinePoints(left, i, ln.Label, len(used) > 1, x, ln.F, ln.FLow, ln.FHigh)
		if err != nil {
			return nil, err
		}
		bars += nb
		if nb, err = addLinePoints(right, i, ln.Label, len(used) > 1, x, ln.OutagePct, ln.OutageLow, ln.OutageHigh); err != nil {
			return nil, err
		}
		bars += nb
	}
	for _, p := range []*panel{left, right} {
		p.Y.Min = math.Min(p.Y.Min, 0)
		p.Y.Max += 0.25 * (p.Y.Max - p.Y.Min)
		p.X.Tick.Marker = valueTicks(all)
	}
	f := &Figure{Title: title, panels: [][]*plot.Plot{{left.done(), right.done()}}, intervals: true, bars: bars}
	f.NoIntervalsBecause("")
	return f, nil
}
