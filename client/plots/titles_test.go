package plots

import (
	"strings"
	"testing"

	"gonum.org/v1/plot/vg"
)

// TestWrapText: a title wider than its panel is broken at spaces into
// lines that each fit, keeping every word in order; one that fits, and a
// single word wider than the panel, are left as they are. Widths come from
// the Liberation Serif metrics of the title font (the font gonum/plot
// embeds and the SVG names).
func TestWrapText(t *testing.T) {
	sty := titleStyle()
	long := "user 15 (cell-edge traffic on the ring road beyond the river, 2000 m, 3 km/h): Tx power"
	full := sty.Width(long)
	cases := []struct {
		name  string
		txt   string
		width vg.Length
		lines int // expected line count; 0: at least 2
	}{
		{"fits", "user 8 (mid cell, 767 m, 3 km/h): SIR", 430, 1},
		{"half a trace row", long, 430, 2},
		{"a third of the width", long, full/3 + 20, 3},
		{"narrow", long, 120, 0},
		{"one word too wide", "supercalifragilistic", 20, 1},
		{"empty", "", 100, 1},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			got := wrapText(sty, tc.txt, tc.width)
			lines := strings.Split(got, "\n")
			if tc.lines > 0 && len(lines) != tc.lines {
				t.Errorf("%d lines %q, want %d", len(lines), lines, tc.lines)
			}
			if tc.lines == 0 && len(lines) < 2 {
				t.Errorf("not wrapped: %q", got)
			}
			if strings.Join(strings.Fields(got), " ") != strings.Join(strings.Fields(tc.txt), " ") {
				t.Errorf("words changed: %q from %q", got, tc.txt)
			}
			for _, l := range lines {
				if w := sty.Width(l); w > tc.width && len(strings.Fields(l)) > 1 {
					t.Errorf("line %q is %.1f pt wide, more than %.1f", l, w, tc.width)
				}
			}
		})
	}
	// Even lines: two lines of a half-row title differ by less than the
	// longest word plus a space (a greedy break could leave one word on
	// the second line).
	lines := strings.Split(wrapText(sty, long, 430), "\n")
	if d := sty.Width(lines[0]) - sty.Width(lines[1]); d > sty.Width(" (cell-edge") || -d > sty.Width(" (cell-edge") {
		t.Errorf("uneven lines %q: widths differ by %.1f pt", lines, d)
	}
}

// TestTitlesRestored: wrapping is done for one drawing; the figure keeps
// its titles, so a second Encode draws the same picture.
func TestTitlesRestored(t *testing.T) {
	tr := Trace{Label: "user 15 (cell-edge traffic on the ring road beyond the river, 2000 m, 3 km/h)",
		TimeS: []float64{0, 1, 2}, SIRDB: []float64{1, 2, 3}, TargetDB: []float64{2, 2, 2}, TxPowerDBM: []float64{0, 1, 0}}
	f, err := Traces("Traces", []Trace{tr})
	if err != nil {
		t.Fatal(err)
	}
	var a, b strings.Builder
	if err := f.Encode(&a, "svg"); err != nil {
		t.Fatal(err)
	}
	if err := f.Encode(&b, "svg"); err != nil {
		t.Fatal(err)
	}
	if a.String() != b.String() {
		t.Error("the second SVG differs from the first")
	}
	if got := f.panels[0][1].Title.Text; got != tr.Label+": Tx power" {
		t.Errorf("title after drawing %q, want the original", got)
	}
	if !strings.Contains(a.String(), ">user 15 (cell-edge traffic") || strings.Contains(a.String(), tr.Label+": Tx power<") {
		t.Error("the SVG does not show the title wrapped")
	}
}
