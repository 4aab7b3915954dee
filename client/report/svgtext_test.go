package report

import (
	"fmt"
	"strconv"
	"strings"
	"testing"

	"golang.org/x/net/html"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/vg"
)

// The plots' text is checked in the markup the report inlines: every
// horizontal label (panel and figure titles, tick and legend labels) must
// lie within the panel it is drawn on, or within the figure when it is on
// no panel (a figure title). Its width is estimated from the advance widths
// of the font the SVG names (Liberation Serif, the copy gonum/plot embeds;
// Liberation Serif is metric-compatible with Times New Roman (memory), so a
// browser that substitutes that font draws the same widths). A panel is a
// white background rectangle as gonum/plot draws one under every plot
// (style exactly "fill:#FFFFFF"; legend boxes are translucent and are not
// panels). Before titles were wrapped, a trace row titled "user 15
// (cell-edge traffic on the ring road beyond the river, 2000 m, 3 km/h): Tx
// power" ran over the neighbouring panel and past the right edge.

// svgTol is the slack of a bound in points: the SVG writer prints
// coordinates to 5 significant digits (0.05 pt at 900 pt).
const svgTol = 0.1

type svgRect struct{ x0, y0, x1, y1 float64 }

func (r svgRect) contains(x, y float64) bool {
	return x >= r.x0 && x <= r.x1 && y >= r.y0 && y <= r.y1
}

type svgLabel struct {
	text       string
	x, y, w    float64 // left end and baseline (canvas coordinates, y up), width
	sizePt     float64
	fontFamily string
}

// rectOf parses an axis-aligned rectangle path "Mx0,y0Lx1,y0Lx1,y1Lx0,y1Z".
func rectOf(d string) (svgRect, bool) {
	d = strings.TrimSuffix(strings.TrimPrefix(strings.TrimSpace(d), "M"), "Z")
	pts := strings.Split(d, "L")
	if len(pts) != 4 {
		return svgRect{}, false
	}
	var xs, ys [4]float64
	for i, p := range pts {
		xy := strings.Split(p, ",")
		if len(xy) != 2 {
			return svgRect{}, false
		}
		var err1, err2 error
		xs[i], err1 = strconv.ParseFloat(xy[0], 64)
		ys[i], err2 = strconv.ParseFloat(xy[1], 64)
		if err1 != nil || err2 != nil {
			return svgRect{}, false
		}
	}
	if xs[0] != xs[3] || xs[1] != xs[2] || ys[0] != ys[1] || ys[2] != ys[3] {
		return svgRect{}, false
	}
	return svgRect{min(xs[0], xs[1]), min(ys[0], ys[2]), max(xs[0], xs[1]), max(ys[0], ys[2])}, true
}

func styleOf(n *html.Node) map[string]string {
	out := map[string]string{}
	for _, a := range n.Attr {
		if a.Key != "style" {
			continue
		}
		for _, kv := range strings.Split(a.Val, ";") {
			if k, v, ok := strings.Cut(kv, ":"); ok {
				out[strings.TrimSpace(k)] = strings.TrimSpace(v)
			}
		}
	}
	return out
}

func attr(n *html.Node, key string) string {
	for _, a := range n.Attr {
		if strings.EqualFold(a.Key, key) {
			return a.Val
		}
	}
	return ""
}

// textWidth is the advance width in points of s in the named font at
// sizePt, from the font's metrics.
func textWidth(family string, sizePt float64, s string) (float64, error) {
	var f font.Font
	switch family {
	case "Liberation Serif":
		f = font.Font{Typeface: "Liberation", Variant: "Serif"}
	default:
		return 0, fmt.Errorf("font %q is not one the plots use", family)
	}
	_ = plot.DefaultFont // the Liberation faces are registered by package plot
	face := font.DefaultCache.Lookup(f, vg.Length(sizePt))
	return float64(face.Width(s)), nil
}

// svgLayout reads the panels and the horizontal labels of one inline SVG
// plot, and its width from the viewBox.
func svgLayout(t *testing.T, svg *html.Node) (width float64, panels []svgRect, labels []svgLabel) {
	t.Helper()
	vb := strings.Fields(attr(svg, "viewbox"))
	if len(vb) != 4 {
		t.Fatalf("svg viewBox %q", attr(svg, "viewbox"))
	}
	width, _ = strconv.ParseFloat(vb[2], 64)
	var rec func(n *html.Node, rotated bool)
	rec = func(n *html.Node, rotated bool) {
		if n.Type == html.ElementNode {
			if strings.Contains(attr(n, "transform"), "rotate") && n.Data != "text" {
				rotated = true
			}
			switch n.Data {
			case "path":
				if styleOf(n)["fill"] == "#FFFFFF" && len(styleOf(n)) == 1 {
					if r, ok := rectOf(attr(n, "d")); ok {
						panels = append(panels, r)
					}
				}
			case "text":
				if rotated || strings.Contains(attr(n, "transform"), "rotate") {
					break
				}
				st := styleOf(n)
				size, err := strconv.ParseFloat(strings.TrimSuffix(st["font-size"], "px"), 64)
				if err != nil {
					t.Fatalf("text %q: font-size %q", text(n), st["font-size"])
				}
				x, _ := strconv.ParseFloat(attr(n, "x"), 64)
				y, _ := strconv.ParseFloat(attr(n, "y"), 64)
				if attr(n, "transform") != "scale(1, -1)" {
					t.Fatalf("text %q: transform %q (the check reads gonum/plot's flipped text)", text(n), attr(n, "transform"))
				}
				s := text(n)
				w, err := textWidth(st["font-family"], size, s)
				if err != nil {
					t.Fatal(err)
				}
				labels = append(labels, svgLabel{text: s, x: x, y: -y, w: w, sizePt: size, fontFamily: st["font-family"]})
			}
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			rec(c, rotated)
		}
	}
	rec(svg, false)
	return width, panels, labels
}

// labelOverflows lists the labels of every inline SVG of page that stick
// out of their panel (the smallest panel holding the middle of the label's
// baseline) or, on no panel, out of the figure.
func labelOverflows(t *testing.T, page string) (overflows []string, labels int) {
	t.Helper()
	doc, err := html.Parse(strings.NewReader(page))
	if err != nil {
		t.Fatal(err)
	}
	walk(doc, func(n *html.Node) {
		if n.Data != "svg" {
			return
		}
		width, panels, ls := svgLayout(t, n)
		for _, l := range ls {
			labels++
			box, where := svgRect{0, -1e9, width, 1e9}, "the figure"
			for _, p := range panels {
				if p.contains(l.x+l.w/2, l.y) && (where == "the figure" || (p.x1-p.x0)*(p.y1-p.y0) < (box.x1-box.x0)*(box.y1-box.y0)) {
					box, where = p, fmt.Sprintf("its panel [%.1f, %.1f]", p.x0, p.x1)
				}
			}
			if l.x < box.x0-svgTol || l.x+l.w > box.x1+svgTol {
				overflows = append(overflows, fmt.Sprintf("%q (%.0f pt at %.0f px) spans [%.1f, %.1f] pt, beyond %s",
					l.text, l.w, l.sizePt, l.x, l.x+l.w, where))
			}
		}
	})
	return overflows, labels
}

// TestPlotLabelsFitTheirPanels renders every fixture, and the run with
// long group and scenario names (the trace titles carry the group name),
// and checks every label of every plot against its panel.
func TestPlotLabelsFitTheirPanels(t *testing.T) {
	long := readFixture(t, "run.json")
	sc := long.Run.GetNormalisedScenario()
	sc.Name = "near-far stress on a hill town's market square, with users right under the mast and others beyond the river at the cell edge"
	for i, name := range []string{"pedestrians on the square under the mast", "mid-cell office workers", "cell-edge traffic on the ring road beyond the river"} {
		if i < len(sc.GetGroups()) {
			sc.GetGroups()[i].Name = name
		}
	}
	cases := []struct {
		name string
		in   Input
	}{
		{"run with long names", long},
		{"run", readFixture(t, "run.json")},
		{"sweep", readFixture(t, "sweep.json")},
		{"sweep heat map", readFixture(t, "sweep_heat.json")},
		{"tune", readFixture(t, "tune.json")},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			over, n := labelOverflows(t, render(t, tc.in))
			if n == 0 {
				t.Fatal("no labels found in the plots: the check reads nothing")
			}
			for _, o := range over {
				t.Errorf("label %s", o)
			}
		})
	}
	// The check itself: a title as wide as the figure on a half-width
	// panel must be reported.
	page := `<svg viewBox="0 0 900 600"><g transform="scale(1, -1) translate(0, -600)">` +
		`<path d="M8,8L446,8L446,592L8,592Z" style="fill:#FFFFFF" />` +
		`<text x="20" y="-570" transform="scale(1, -1)" style="font-family:Liberation Serif;font-size:17px">` +
		strings.Repeat("a title too wide for half the figure ", 3) + `</text></g></svg>`
	if over, n := labelOverflows(t, page); n != 1 || len(over) != 1 {
		t.Errorf("an overflowing title gave %d reports of %d labels, want 1 of 1", len(over), n)
	}
}
