package plots

import (
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
)

// Titles that are wider than their panel (a trace row's "user 15 (group
// name, 2000 m, 3 km/h): Tx power" with a long group name) are broken into
// lines at spaces rather than run into the next panel or off the canvas.
// The font size stays the same as every other title's.

// wrapText breaks txt at spaces into as few lines as fit width in sty, with
// the lines as even in length as that count allows (the narrowest width
// that still needs no more lines). Text that fits, and a single word wider
// than width, are returned unchanged (a word is never split). Existing line
// breaks are kept.
func wrapText(sty text.Style, txt string, width vg.Length) string {
	if txt == "" || width <= 0 || sty.Width(txt) <= width {
		return txt
	}
	var out []string
	for _, para := range strings.Split(txt, "\n") {
		words := strings.Fields(para)
		lines := greedyLines(sty, words, width)
		// Narrow the width while the line count stays the same: even lines
		// read better than one long line and a short tail.
		lo, hi := vg.Length(0), width
		for range 24 {
			mid := (lo + hi) / 2
			if len(greedyLines(sty, words, mid)) <= len(lines) {
				hi = mid
			} else {
				lo = mid
			}
		}
		out = append(out, greedyLines(sty, words, hi)...)
	}
	return strings.Join(out, "\n")
}

// greedyLines fills lines word by word up to width; a word wider than
// width gets a line of its own.
func greedyLines(sty text.Style, words []string, width vg.Length) []string {
	var lines []string
	cur := ""
	for _, w := range words {
		if cur == "" {
			cur = w
			continue
		}
		if next := cur + " " + w; sty.Width(next) <= width {
			cur = next
			continue
		}
		lines = append(lines, cur)
		cur = w
	}
	if cur != "" {
		lines = append(lines, cur)
	}
	return lines
}

// fitTitle wraps p's title to width (the width of the canvas p is drawn
// on; gonum centres the title on it) and returns a function that restores
// the original title, or nil when the title already fits.
func fitTitle(p *plot.Plot, width vg.Length) (restore func()) {
	orig := p.Title.Text
	wrapped := wrapText(p.Title.TextStyle, orig, width)
	if wrapped == orig {
		return nil
	}
	p.Title.Text = wrapped
	return func() { p.Title.Text = orig }
}
