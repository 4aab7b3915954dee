package plots

import (
	"bytes"
	"image/color"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/recorder"
)

// testLayout is 7 sites × 3 sectors (D = 750 m, sites on the hexagonal
// grid) with 60 users in two groups at random places (seeded).
func testLayout() LayoutMapData {
	const D = 750.0
	d := LayoutMapData{InterSiteDistanceM: D, ValueLabel: "outage (%)", GroupNames: []string{"walkers", "road traffic"}}
	sites := [][2]float64{{0, 0}}
	for k := 0; k < 6; k++ {
		a := (30 + 60*float64(k)) * math.Pi / 180
		sites = append(sites, [2]float64{D * math.Cos(a), D * math.Sin(a)})
	}
	for s, p := range sites {
		for k := 0; k < 3; k++ {
			d.Cells = append(d.Cells, MapCell{Name: "S" + string(rune('0'+s)) + "/" + string(rune('0'+k)), SiteXM: p[0], SiteYM: p[1],
				Sector: true, BoresightDeg: 30 + 120*float64(k)})
		}
	}
	r := rand.New(rand.NewPCG(7, 1))
	for i := 0; i < 60; i++ {
		d.Users = append(d.Users, MapUser{XM: (r.Float64()*2 - 1) * 1000, YM: (r.Float64()*2 - 1) * 900, Group: i % 2, Value: 3 + 20*r.Float64()})
	}
	return d
}

// TestLayoutMapToScale: the map is drawn to scale. Each site hexagon
// (pointy-top, circumradius r) spans r√3 across and 2r from top to
// bottom, so its drawn height over width is 2/√3 (geometry) exactly when a
// km has the same length on both axes; 0.5 % allows for the stroke
// rounding of the recorder (points with float coordinates: far less).
func TestLayoutMapToScale(t *testing.T) {
	f, err := LayoutMap("map", testLayout())
	if err != nil {
		t.Fatal(err)
	}
	var rec recorder.Canvas
	f.draw(draw.NewCanvas(&rec, Width, Height))
	hexes := 0
	for _, a := range rec.Actions {
		s, ok := a.(*recorder.Stroke)
		if !ok || len(s.Path) != 7 { // a hexagon: move + 6 lines (plotter.Line)
			continue
		}
		xmin, xmax, ymin, ymax := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
		for _, c := range s.Path {
			x, y := float64(c.Pos.X), float64(c.Pos.Y)
			xmin, xmax, ymin, ymax = math.Min(xmin, x), math.Max(xmax, x), math.Min(ymin, y), math.Max(ymax, y)
		}
		hexes++
		if got, want := (ymax-ymin)/(xmax-xmin), 2/math.Sqrt(3); math.Abs(got/want-1) > 0.005 {
			t.Errorf("hexagon %d: height/width %.4f, want 2/√3 = %.4f (%.1f × %.1f pt)", hexes, got, want, xmax-xmin, ymax-ymin)
		}
	}
	if hexes != 7 {
		t.Errorf("%d hexagons drawn, want 7", hexes)
	}
}

// TestLayoutMapMarksGroupsAndCells: the SVG names every cell as the
// per-cell table does, has one legend entry per group with its user
// count, draws the groups with different marker shapes, and draws its
// colour bar as vector bands (an embedded image is stretched differently
// by browsers: the bar came out as a thin strip away from its axis).
func TestLayoutMapMarksGroupsAndCells(t *testing.T) {
	d := testLayout()
	f, err := LayoutMap("map", d)
	if err != nil {
		t.Fatal(err)
	}
	var b bytes.Buffer
	if err := f.Encode(&b, "svg"); err != nil {
		t.Fatal(err)
	}
	svg := b.String()
	for _, want := range []string{">S0/0<", ">S6/2<", ">S3/1<", ">walkers (30 users)<", ">road traffic (30 users)<"} {
		if !strings.Contains(svg, want) {
			t.Errorf("SVG has no text %q", want)
		}
	}
	if strings.Contains(svg, "<image") {
		t.Error("SVG colour bar is an embedded image")
	}
	if groupMarkers[0] == groupMarkers[1] {
		t.Error("groups 0 and 1 share a marker shape")
	}
	// Each user's marker: a filled path of its group's shape. Count the
	// circles (arcs) and squares (4 lines) among the fills.
	var rec recorder.Canvas
	f.draw(draw.NewCanvas(&rec, Width, Height))
	circles, squares := 0, 0
	for _, a := range rec.Actions {
		fl, ok := a.(*recorder.Fill)
		if !ok {
			continue
		}
		switch {
		case len(fl.Path) == 3 && fl.Path[1].Type == vg.ArcComp && fl.Path[1].Radius < vg.Points(5):
			circles++
		case len(fl.Path) == 5 && fl.Path[4].Type == vg.CloseComp:
			w := math.Abs(float64(fl.Path[2].Pos.X - fl.Path[0].Pos.X))
			h := math.Abs(float64(fl.Path[2].Pos.Y - fl.Path[0].Pos.Y))
			if w > 0 && w < 12 && math.Abs(w-h) < 1e-6 {
				squares++ // a small square (the bands of the colour bar and the label backdrops are wide)
			}
		}
	}
	// The users inside the plot area plus one legend thumbnail each.
	if circles < 20 || squares < 20 {
		t.Errorf("%d circle and %d square markers, want about 31 of each", circles, squares)
	}
}

// TestSequentialScale: the user colours are sequential: their luminance
// falls steadily from the low end (ColorBrewer YlOrRd #ffeda0) to the high
// end (#800026) (ColorBrewer scheme YlOrRd (common practice)); relative
// luminance with the sRGB-linear coefficients 0.2126, 0.7152, 0.0722 (ITU-R
// BT.709).
func TestSequentialScale(t *testing.T) {
	lum := func(c color.Color) float64 {
		r, g, b, _ := c.RGBA()
		lin := func(v uint32) float64 {
			x := float64(v) / 0xffff
			if x <= 0.04045 {
				return x / 12.92
			}
			return math.Pow((x+0.055)/1.055, 2.4)
		}
		return 0.2126*lin(r) + 0.7152*lin(g) + 0.0722*lin(b)
	}
	if got := color.RGBAModel.Convert(sequential(0)).(color.RGBA); got != (color.RGBA{0xff, 0xed, 0xa0, 0xff}) {
		t.Errorf("low end %v, want #ffeda0", got)
	}
	if got := color.RGBAModel.Convert(sequential(1)).(color.RGBA); got != (color.RGBA{0x80, 0x00, 0x26, 0xff}) {
		t.Errorf("high end %v, want #800026", got)
	}
	prev := math.Inf(1)
	for i := 0; i <= 100; i++ {
		l := lum(sequential(float64(i) / 100))
		if l > prev+1e-9 {
			t.Errorf("luminance rises at t = %.2f: %.4f after %.4f", float64(i)/100, l, prev)
		}
		prev = l
	}
}
