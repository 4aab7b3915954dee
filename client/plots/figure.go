// Package plots draws fadeloop's figures with gonum/plot from plain Go data:
// the SIR-error distribution per candidate setting, SIR / SIR-target / Tx
// power traces against time, outage and SIR-error spread against inner-loop
// step size (one line per speed), a step × update-rate heat map of a tuning
// objective, and Tx power against distance (near-far).
//
// Every figure is drawn on a 1200 × 800 pixel canvas (900 × 600 pt at
// 96 dpi) with axis labels that carry units, a legend where there is more
// than one series, and fonts sized to be read at that size; a title wider
// than its panel is wrapped onto more lines. Save picks the format from the
// file extension (.png or .svg).
package plots

import (
	"encoding/xml"
	"errors"
	"fmt"
	"image/color"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Canvas size of every figure. WidthPx × HeightPx pixels at DPI dots per
// inch; in points (1/72 in) that is Width × Height.
const (
	WidthPx  = 1200
	HeightPx = 800
	DPI      = 96
	Width    = vg.Length(WidthPx) * vg.Inch / DPI
	Height   = vg.Length(HeightPx) * vg.Inch / DPI
)

// Font sizes in points; at 96 dpi a point is 4/3 pixel.
const (
	titleSize  = 17
	labelSize  = 14
	tickSize   = 12
	legendSize = 12
)

// Figure is one picture made of panels laid out in a grid, with an optional
// narrow strip at the right (used for a colour bar). Build one with the
// functions of this package and write it with Save or Encode.
type Figure struct {
	// Title is drawn across the top of the figure when it has more than one
	// panel; a single panel carries its own title.
	Title string
	// Subtitle is a smaller line under the title (e.g. why a figure that
	// shows 95 % intervals has none); empty for none.
	Subtitle string
	panels   [][]*plot.Plot
	side     *plot.Plot
	equal    bool // one data unit as long on x as on y in every panel (a map)
	// intervals: the figure shows 95 % intervals as error bars where its
	// points have them; bars: how many it draws.
	intervals bool
	bars      int
}

// NoIntervalsNote is the subtitle of a figure meant to show 95 % intervals
// that has none to show; NoIntervalsBecause adds the reason.
const NoIntervalsNote = "no intervals"

// NoIntervalsBecause sets the subtitle to "no intervals: " + reason (e.g.
// "1 replication") when the figure is one that shows 95 % intervals as
// error bars and none of its points has one; otherwise it does nothing.
// The figures that show intervals set the bare NoIntervalsNote themselves.
func (f *Figure) NoIntervalsBecause(reason string) {
	if f != nil && f.intervals && f.bars == 0 {
		f.Subtitle = NoIntervalsNote
		if reason != "" {
			f.Subtitle += ": " + reason
		}
	}
}

// ErrorBars is the number of error bars (95 % intervals) the figure draws.
func (f *Figure) ErrorBars() int { return f.bars }

// ErrFormat is returned for a file extension other than .png or .svg.
var ErrFormat = errors.New("plot file must end in .png or .svg")

// FormatOf returns "png" or "svg" for a file name, or ErrFormat.
func FormatOf(path string) (string, error) {
	switch strings.ToLower(filepath.Ext(path)) {
	case ".png":
		return "png", nil
	case ".svg":
		return "svg", nil
	}
	return "", fmt.Errorf("%q: %w", path, ErrFormat)
}

// Save writes the figure to path, in PNG or SVG by the extension.
func (f *Figure) Save(path string) (err error) {
	format, err := FormatOf(path)
	if err != nil {
		return err
	}
	file, err := os.Create(path)
	if err != nil {
		return err
	}
	defer func() {
		if cerr := file.Close(); err == nil {
			err = cerr
		}
	}()
	return f.Encode(file, format)
}

// Encode writes the figure to w in format "png" or "svg".
func (f *Figure) Encode(w io.Writer, format string) error {
	var (
		c  vg.CanvasWriterTo
		dc draw.Canvas
	)
	switch format {
	case "png":
		img := vgimg.NewWith(vgimg.UseWH(Width, Height), vgimg.UseDPI(DPI),
			vgimg.UseBackgroundColor(color.White))
		c = vgimg.PngCanvas{Canvas: img}
		dc = draw.New(img)
	case "svg":
		svg := vgsvg.New(Width, Height)
		c = svg
		dc = draw.New(svg)
	default:
		return fmt.Errorf("format %q: %w", format, ErrFormat)
	}
	f.draw(dc)
	_, err := c.WriteTo(w)
	return err
}

func (f *Figure) draw(dc draw.Canvas) {
	pad := vg.Points(8)
	area := dc
	area.Min.X += pad
	area.Min.Y += pad
	area.Max.X -= pad
	area.Max.Y -= pad
	multi := len(f.panels) > 1 || (len(f.panels) == 1 && len(f.panels[0]) > 1)
	if multi && f.Title != "" {
		sty := titleStyle()
		title := wrapText(sty, f.Title, area.Max.X-area.Min.X)
		h := sty.Height(title)
		pt := vg.Point{X: (area.Min.X + area.Max.X) / 2, Y: area.Max.Y - h}
		area.FillText(sty, pt, title)
		area.Max.Y -= h + pad
	}
	if f.Subtitle != "" {
		sty := titleStyle()
		sty.Font.Size = labelSize
		sty.Color = color.Gray{Y: 70}
		sub := wrapText(sty, f.Subtitle, area.Max.X-area.Min.X)
		h := sty.Height(sub)
		pt := vg.Point{X: (area.Min.X + area.Max.X) / 2, Y: area.Max.Y - h}
		area.FillText(sty, pt, sub)
		area.Max.Y -= h + pad
	}
	if f.side != nil {
		sideW := vg.Points(110)
		side := area
		side.Min.X = area.Max.X - sideW
		area.Max.X -= sideW + pad
		if restore := fitTitle(f.side, sideW); restore != nil {
			defer restore()
		}
		f.side.Draw(side)
	}
	rows := len(f.panels)
	if rows == 0 {
		return
	}
	cols := 0
	for _, r := range f.panels {
		cols = max(cols, len(r))
	}
	tiles := draw.Tiles{Rows: rows, Cols: cols, PadX: vg.Points(18), PadY: vg.Points(14)}
	grid := make([][]*plot.Plot, rows)
	for i := range grid {
		grid[i] = make([]*plot.Plot, cols)
		copy(grid[i], f.panels[i])
	}
	// A panel title wider than its canvas is wrapped (titles.go); the
	// panels are then aligned again for the taller titles. The figure keeps
	// its titles for the next Encode.
	canvases := plot.Align(grid, tiles, area)
	wrapped := false
	for i := range grid {
		for j, p := range grid[i] {
			if p == nil {
				continue
			}
			if restore := fitTitle(p, canvases[i][j].Max.X-canvases[i][j].Min.X); restore != nil {
				defer restore()
				wrapped = true
			}
		}
	}
	if wrapped {
		canvases = plot.Align(grid, tiles, area)
	}
	for i := range grid {
		for j, p := range grid[i] {
			if p != nil {
				if f.equal {
					equalScales(p, canvases[i][j])
				}
				p.Draw(canvases[i][j])
			}
		}
	}
}

func titleStyle() draw.TextStyle {
	p := plot.New()
	s := p.Title.TextStyle
	s.Font.Size = titleSize
	s.XAlign = draw.XCenter
	s.YAlign = draw.YBottom
	return s
}

// newPanel makes a plot with this package's fonts, a grid and the given
// title and axis labels (labels carry units).
func newPanel(title, xLabel, yLabel string) *panel {
	p := &panel{Plot: plot.New()}
	p.Title.Text = title
	p.Title.TextStyle.Font.Size = titleSize
	p.Title.Padding = vg.Points(6)
	p.X.Label.Text = xLabel
	p.Y.Label.Text = yLabel
	for _, ax := range []*plot.Axis{&p.X, &p.Y} {
		ax.Label.TextStyle.Font.Size = labelSize
		ax.Tick.Label.Font.Size = tickSize
		ax.Padding = vg.Points(4)
	}
	p.Legend.TextStyle.Font.Size = legendSize
	p.Legend.Top = true
	p.Legend.Padding = vg.Points(4)
	p.Legend.ThumbnailWidth = vg.Points(28)
	p.X.Tick.Marker = denseTicks{}
	p.Y.Tick.Marker = denseTicks{}
	p.Add(newGrid())
	return p
}

func newGrid() plot.Plotter {
	g := plotter.NewGrid()
	g.Vertical.Color = color.Gray{Y: 215}
	g.Horizontal.Color = color.Gray{Y: 215}
	return g
}

// palette8 is a qualitative palette that stays apart on white and in grey
// (Okabe–Ito colours (common practice)).
var palette8 = []color.Color{
	color.RGBA{0, 114, 178, 255},   // blue
	color.RGBA{213, 94, 0, 255},    // vermillion
	color.RGBA{0, 158, 115, 255},   // bluish green
	color.RGBA{204, 121, 167, 255}, // reddish purple
	color.RGBA{230, 159, 0, 255},   // orange
	color.RGBA{86, 180, 233, 255},  // sky blue
	color.RGBA{0, 0, 0, 255},       // black
	color.RGBA{240, 228, 66, 255},  // yellow
}

// dashes cycles line styles so that series stay apart beyond the palette.
var dashes = [][]vg.Length{
	nil,
	{vg.Points(8), vg.Points(4)},
	{vg.Points(2), vg.Points(3)},
	{vg.Points(10), vg.Points(3), vg.Points(2), vg.Points(3)},
}

func seriesColor(i int) color.Color { return palette8[i%len(palette8)] }
func seriesDash(i int) []vg.Length  { return dashes[(i/len(palette8))%len(dashes)] }

// SVGSize reads the width and height (in points) of the root element of an
// SVG file, as written by Save: 900 × 600 pt for every figure here.
func SVGSize(path string) (widthPt, heightPt float64, err error) {
	f, err := os.Open(path)
	if err != nil {
		return 0, 0, err
	}
	defer f.Close()
	dec := xml.NewDecoder(f)
	for {
		tok, err := dec.Token()
		if err != nil {
			return 0, 0, fmt.Errorf("%s: no <svg> element: %w", path, err)
		}
		se, ok := tok.(xml.StartElement)
		if !ok {
			continue
		}
		if se.Name.Local != "svg" {
			return 0, 0, fmt.Errorf("%s: root element is <%s>, not <svg>", path, se.Name.Local)
		}
		for _, a := range se.Attr {
			v := strings.TrimSuffix(a.Value, "pt")
			switch a.Name.Local {
			case "width":
				widthPt, err = strconv.ParseFloat(v, 64)
			case "height":
				heightPt, err = strconv.ParseFloat(v, 64)
			}
			if err != nil {
				return 0, 0, fmt.Errorf("%s: %s=%q: %w", path, a.Name.Local, a.Value, err)
			}
		}
		return widthPt, heightPt, nil
	}
}

// legendBox draws a panel's legend in a white, lightly framed box inside
// the data area, at the corner the panel's Legend.Left / Legend.Top name:
// one row per entry, its thumbnail (line sample and/or marker) at the left
// and its label after it, box and entries measured on the same canvas so
// that every sample stays inside the frame. Add it last (after the data) and
// register every entry through panel.legend; the gonum Legend of the plot
// stays empty and only lends its text style, padding, thumbnail width and
// corner.
type legendBox struct {
	entries []legendEntry
}

type legendEntry struct {
	label  string
	thumbs []plot.Thumbnailer
}

// Legend geometry in points: legendInset between the data area's edge and
// the frame, legendMargin between the frame and the entries, legendRowMin
// the least row height (a marker of radius ≤ 6 pt fits a row).
const (
	legendInset  = 6
	legendMargin = 5
	legendRowMin = 14
)

// legendFrameColor is the colour of the legend's frame (tests find the
// frame by it).
var legendFrameColor = color.Gray{Y: 170}

// layout returns the frame rectangle and, per entry, the rectangle of its
// thumbnail and the point its label starts at (left end, vertical centre),
// for data canvas c.
func (b *legendBox) layout(c draw.Canvas, l plot.Legend) (frame vg.Rectangle, thumbs []vg.Rectangle, texts []vg.Point) {
	sty := l.TextStyle
	rowH := max(sty.FontExtents().Height, vg.Points(legendRowMin))
	gap := sty.Rectangle(" ").Max.X
	var textW vg.Length
	for _, e := range b.entries {
		textW = max(textW, sty.Rectangle(e.label).Max.X)
	}
	n := vg.Length(len(b.entries))
	m := vg.Points(legendMargin)
	w := 2*m + l.ThumbnailWidth + gap + textW
	h := 2*m + n*rowH + (n-1)*l.Padding
	in := vg.Points(legendInset)
	if l.Left {
		frame.Min.X = c.Min.X + in
		frame.Max.X = frame.Min.X + w
	} else {
		frame.Max.X = c.Max.X - in
		frame.Min.X = frame.Max.X - w
	}
	if l.Top {
		frame.Max.Y = c.Max.Y - in
		frame.Min.Y = frame.Max.Y - h
	} else {
		frame.Min.Y = c.Min.Y + in
		frame.Max.Y = frame.Min.Y + h
	}
	y := frame.Max.Y - m
	for range b.entries {
		r := vg.Rectangle{
			Min: vg.Point{X: frame.Min.X + m, Y: y - rowH},
			Max: vg.Point{X: frame.Min.X + m + l.ThumbnailWidth, Y: y},
		}
		thumbs = append(thumbs, r)
		texts = append(texts, vg.Point{X: r.Max.X + gap, Y: y - rowH/2})
		y -= rowH + l.Padding
	}
	return frame, thumbs, texts
}

func (b *legendBox) Plot(c draw.Canvas, p *plot.Plot) {
	if len(b.entries) == 0 {
		return
	}
	frame, thumbs, texts := b.layout(c, p.Legend)
	c.SetColor(color.NRGBA{R: 255, G: 255, B: 255, A: 235})
	c.Fill(frame.Path())
	c.SetLineStyle(draw.LineStyle{Color: legendFrameColor, Width: vg.Points(0.8)})
	c.Stroke(frame.Path())
	sty := p.Legend.TextStyle
	sty.XAlign, sty.YAlign = draw.XLeft, draw.YCenter
	for i, e := range b.entries {
		icon := draw.Canvas{Canvas: c.Canvas, Rectangle: thumbs[i]}
		for _, t := range e.thumbs {
			t.Thumbnail(&icon)
		}
		c.FillText(sty, texts[i], e.label)
	}
}

// panel is a plot under construction with its legend.
type panel struct {
	*plot.Plot
	box legendBox
}

// legend adds a legend entry (drawn by legendBox).
func (p *panel) legend(label string, thumbs ...plot.Thumbnailer) {
	p.box.entries = append(p.box.entries, legendEntry{label: label, thumbs: thumbs})
}

// done adds the legend on top of the data and returns the plot.
func (p *panel) done() *plot.Plot {
	p.Add(&p.box)
	return p.Plot
}

// denseTicks labels about eight major ticks at 1, 2, 2.5 or 5 × 10^k, with
// four minor ticks between (gonum's default labels only three or four).
type denseTicks struct{}

func (denseTicks) Ticks(lo, hi float64) []plot.Tick {
	if !(hi > lo) || math.IsInf(hi-lo, 0) {
		return plot.DefaultTicks{}.Ticks(lo, hi)
	}
	raw := (hi - lo) / 8
	mag := math.Pow(10, math.Floor(math.Log10(raw)))
	step := mag * 10
	for _, m := range []float64{1, 2, 2.5, 5} {
		if m*mag >= raw {
			step = m * mag
			break
		}
	}
	minor := step / 5
	var ticks []plot.Tick
	first := math.Ceil(lo/minor) * minor
	for k := 0; ; k++ {
		v := first + float64(k)*minor
		if v > hi+minor*1e-9 {
			break
		}
		if math.Abs(v) < minor*1e-9 {
			v = 0
		}
		t := plot.Tick{Value: v}
		if r := math.Abs(v/step - math.Round(v/step)); r < 1e-6 {
			t.Label = strconv.FormatFloat(v, 'g', 6, 64)
		}
		ticks = append(ticks, t)
	}
	return ticks
}
