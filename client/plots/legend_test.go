package plots

import (
	"bytes"
	"image/color"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/recorder"
)

// drawn is what a figure drew, from a recording of its drawing calls:
// legend frames (strokes in legendFrameColor), horizontal line segments
// (with their colour) and texts.
type drawn struct {
	frames []vg.Rectangle
	hlines []segment
	vlines []segment
	texts  []*recorder.FillString
}

type segment struct {
	a, b vg.Point
	c    color.Color
}

func record(t *testing.T, f *Figure) drawn {
	t.Helper()
	var rec recorder.Canvas
	f.draw(draw.NewCanvas(&rec, Width, Height))
	var d drawn
	var cur color.Color = color.Black
	for _, a := range rec.Actions {
		switch a := a.(type) {
		case *recorder.SetColor:
			cur = a.Color
		case *recorder.FillString:
			d.texts = append(d.texts, a)
		case *recorder.Stroke:
			p := a.Path
			if len(p) == 5 && p[4].Type == vg.CloseComp && sameColor(cur, legendFrameColor) {
				r := vg.Rectangle{Min: p[0].Pos, Max: p[0].Pos}
				for _, c := range p[1:4] {
					r.Min.X, r.Min.Y = min(r.Min.X, c.Pos.X), min(r.Min.Y, c.Pos.Y)
					r.Max.X, r.Max.Y = max(r.Max.X, c.Pos.X), max(r.Max.Y, c.Pos.Y)
				}
				d.frames = append(d.frames, r)
			}
			if len(p) == 2 && p[0].Type == vg.MoveComp && p[1].Type == vg.LineComp {
				s := segment{a: p[0].Pos, b: p[1].Pos, c: cur}
				switch {
				case p[0].Pos.Y == p[1].Pos.Y:
					d.hlines = append(d.hlines, s)
				case p[0].Pos.X == p[1].Pos.X:
					d.vlines = append(d.vlines, s)
				}
			}
		}
	}
	return d
}

func sameColor(a, b color.Color) bool {
	r1, g1, b1, a1 := a.RGBA()
	r2, g2, b2, a2 := b.RGBA()
	return r1 == r2 && g1 == g2 && b1 == b2 && a1 == a2
}

// inside reports whether p lies in r at least gap from its edges.
func inside(p vg.Point, r vg.Rectangle, gap vg.Length) bool {
	return p.X >= r.Min.X+gap && p.X <= r.Max.X-gap && p.Y >= r.Min.Y+gap && p.Y <= r.Max.Y-gap
}

// twoLineLayout is a LayoutSweep of two lines over the same x values with
// intervals (or NaN bounds when noCI).
func twoLineLayout(t *testing.T, lines int, noCI bool) *Figure {
	t.Helper()
	var ls []LayoutLine
	for i := range lines {
		l := LayoutLine{Label: []string{"step 0.5 dB", "step 1 dB", "step 2 dB"}[i]}
		for _, x := range []float64{0, 3, 6} {
			f, o := 2.4-0.2*x+0.1*float64(i), 10+float64(i)
			lo, hi := f-0.3, f+0.4
			olo, ohi := o-0.5, o+0.6
			if noCI {
				lo, hi, olo, ohi = math.NaN(), math.NaN(), math.NaN(), math.NaN()
			}
			l.X = append(l.X, x)
			l.F, l.FLow, l.FHigh = append(l.F, f), append(l.FLow, lo), append(l.FHigh, hi)
			l.OutagePct, l.OutageLow, l.OutageHigh = append(l.OutagePct, o), append(l.OutageLow, olo), append(l.OutageHigh, ohi)
		}
		ls = append(ls, l)
	}
	f, err := LayoutSweep("Multi-cell figures against layout.handover.window_db", "window (dB)", ls)
	if err != nil {
		t.Fatal(err)
	}
	return f
}

// TestLegendInsideItsFrame: every legend's line samples (horizontal
// strokes exactly one thumbnail wide) and label starts lie inside its
// frame, clear of it by sampleGap (a 2 pt line then does not touch the
// 0.8 pt frame), and the frame stays edgeGap clear of the figure's edge
// (the 8 pt page margin plus a visible gap). The samples used to run onto
// the frame, which touched the page margin at the image edge: the frame was
// measured on the data area, the entries on the wider legend area.
func TestLegendInsideItsFrame(t *testing.T) {
	figs := sampleFigures(t)
	figs["layout-2"] = twoLineLayout(t, 2, false)
	for name, f := range figs {
		t.Run(name, func(t *testing.T) {
			d := record(t, f)
			if len(d.frames) == 0 {
				t.Skip("no legend in this figure")
			}
			const sampleGap, edgeGap = vg.Length(3), vg.Length(12)
			thumbW := float64(newPanel("", "", "").Legend.ThumbnailWidth)
			samples := 0
			for _, s := range d.hlines {
				if math.Abs(float64(s.b.X-s.a.X)-thumbW) > 1e-6 {
					continue
				}
				samples++
				ok := false
				for _, r := range d.frames {
					ok = ok || (inside(s.a, r, sampleGap) && inside(s.b, r, sampleGap))
				}
				if !ok {
					t.Errorf("line sample %v–%v is outside every legend frame %v", s.a, s.b, d.frames)
				}
			}
			for _, r := range d.frames {
				if !inside(r.Min, vg.Rectangle{Max: vg.Point{X: Width, Y: Height}}, edgeGap) || !inside(r.Max, vg.Rectangle{Max: vg.Point{X: Width, Y: Height}}, edgeGap) {
					t.Errorf("frame %v is within %v pt of the figure's edge (%v × %v pt)", r, edgeGap, Width, Height)
				}
			}
			if name == "layout-2" {
				if samples != 4 { // two entries in each of two panels
					t.Errorf("%d line samples, want 4", samples)
				}
				for _, label := range []string{"step 0.5 dB", "step 1 dB"} {
					n := 0
					for _, s := range d.texts {
						if s.String != label {
							continue
						}
						n++
						ok := false
						for _, r := range d.frames {
							ok = ok || inside(s.Point, r, sampleGap)
						}
						if !ok {
							t.Errorf("label %q at %v is outside every legend frame", label, s.Point)
						}
					}
					if n != 2 {
						t.Errorf("label %q drawn %d times, want 2 (one per panel)", label, n)
					}
				}
			}
		})
	}
}

// TestOneSeriesNoLegendEntry: a figure with one line has no legend entry
// for it (it used to say "all"); two lines are named; the recommended
// marker keeps its entry.
func TestOneSeriesNoLegendEntry(t *testing.T) {
	svg := func(f *Figure) string {
		var b bytes.Buffer
		if err := f.Encode(&b, "svg"); err != nil {
			t.Fatal(err)
		}
		return b.String()
	}
	one := LayoutLine{Label: "all", X: []float64{0, 3}, F: []float64{2, 1}, FLow: []float64{1.8, 0.9}, FHigh: []float64{2.2, 1.1},
		OutagePct: []float64{10, 9}, OutageLow: []float64{9, 8}, OutageHigh: []float64{11, 10}}
	f, err := LayoutSweep("t", "window (dB)", []LayoutLine{one})
	if err != nil {
		t.Fatal(err)
	}
	if s := svg(f); strings.Contains(s, ">all<") {
		t.Error("one-line layout figure has a legend entry \"all\"")
	}
	if d := record(t, f); len(d.frames) != 0 {
		t.Errorf("one-line layout figure draws %d legend frames, want none", len(d.frames))
	}
	if s := svg(twoLineLayout(t, 2, false)); !strings.Contains(s, ">step 0.5 dB<") || !strings.Contains(s, ">step 1 dB<") {
		t.Error("two-line layout figure does not name both lines")
	}
	var sl StepLine
	sl.Label = "base (winner)"
	sl.Add(0.5, 0.07, 0.065, 0.075, 2.1, 2.0, 2.2)
	sl.Add(1, 0.10, 0.09, 0.11, 2.5, 2.45, 2.55)
	sl.Recommended = []bool{true, false}
	f, err = StepSensitivity("t", []StepLine{sl})
	if err != nil {
		t.Fatal(err)
	}
	s := svg(f)
	if strings.Contains(s, ">base (winner)<") {
		t.Error("one-line step figure names its line in a legend")
	}
	if !strings.Contains(s, ">recommended<") {
		t.Error("one-line step figure lost its \"recommended\" legend entry")
	}
}

// TestNoIntervalsSubtitle: a figure of intervals with none to draw says
// so under its title, with the caller's reason; one with intervals has no
// such subtitle whatever the caller passes.
func TestNoIntervalsSubtitle(t *testing.T) {
	f := twoLineLayout(t, 1, true)
	if f.ErrorBars() != 0 {
		t.Fatalf("%d error bars drawn for NaN bounds, want 0", f.ErrorBars())
	}
	if f.Subtitle != NoIntervalsNote {
		t.Errorf("subtitle %q without a reason, want %q", f.Subtitle, NoIntervalsNote)
	}
	f.NoIntervalsBecause("1 replication")
	var b bytes.Buffer
	if err := f.Encode(&b, "svg"); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(b.String(), ">no intervals: 1 replication<") {
		t.Errorf("SVG has no subtitle \"no intervals: 1 replication\" (Subtitle %q)", f.Subtitle)
	}
	g := twoLineLayout(t, 1, false)
	if g.ErrorBars() != 6 { // 3 points × 2 panels
		t.Errorf("%d error bars, want 6", g.ErrorBars())
	}
	g.NoIntervalsBecause("1 replication")
	if g.Subtitle != "" {
		t.Errorf("figure with intervals got subtitle %q", g.Subtitle)
	}
	var nilFig *Figure
	nilFig.NoIntervalsBecause("1 replication") // a failed build's nil figure: no panic
}

// TestDodge: lines are shifted apart in x by dodgeFraction of the x range,
// centred on the true value; one line is not shifted. In the drawing, the
// error bars of two lines at the same x are at different horizontal
// positions (they used to coincide).
func TestDodge(t *testing.T) {
	for _, c := range []struct {
		n    int
		xs   []float64
		want []float64
	}{
		{1, []float64{0, 3, 6}, []float64{0}},
		{2, []float64{0, 3, 6}, []float64{-0.045, 0.045}},
		{3, []float64{0.5, 1, 2}, []float64{-0.0225, 0, 0.0225}},
		{2, []float64{4, 4}, []float64{-0.03, 0.03}}, // one distinct x: 1.5 % of |x|
		{2, []float64{0, 0}, []float64{-0.0075, 0.0075}},
	} {
		got := dodge(c.n, c.xs)
		if len(got) != len(c.want) {
			t.Fatalf("dodge(%d, %v) = %v, want %v", c.n, c.xs, got, c.want)
		}
		for i := range got {
			if math.Abs(got[i]-c.want[i]) > 1e-12 {
				t.Errorf("dodge(%d, %v) = %v, want %v", c.n, c.xs, got, c.want)
				break
			}
		}
	}

	d := record(t, twoLineLayout(t, 2, false))
	xs := map[int][]vg.Length{}
	for _, s := range d.vlines {
		for i := range 2 {
			if sameColor(s.c, seriesColor(i)) {
				xs[i] = append(xs[i], s.a.X)
			}
		}
	}
	if len(xs[0]) != 6 || len(xs[1]) != 6 { // 3 bars in each of 2 panels
		t.Fatalf("error bars found: %d and %d, want 6 each", len(xs[0]), len(xs[1]))
	}
	for _, a := range xs[0] {
		for _, b := range xs[1] {
			if math.Abs(float64(a-b)) < 2 {
				t.Errorf("error bars of the two lines %.2f pt apart (at %.1f and %.1f pt), want ≥ 2 pt", math.Abs(float64(a-b)), a, b)
			}
		}
	}
}
