package report

import (
	"math"
	"strconv"
	"strings"
	"testing"

	"golang.org/x/net/html"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// The layout fixtures are real outputs of the CLI on the multi-cell
// example (`fadeloop example --multi-cell > town.yaml`):
//
//	fadeloop run town.yaml --slots 600 --replications 2 --quiet --format json --out layout_run.json
//	fadeloop run town.yaml --slots 600 --replications 1 --quiet --format json --out layout_run1.json
//
// With one replication of 480 measured slots the engine withholds every
// interval (NaN bounds; its notes say why).

// sectionRows returns the rows (cell texts, no-break spaces as spaces) of
// every table in the page's section with the given id, keyed by the text
// of the row's first cell.
func sectionRows(t *testing.T, page, id string) map[string][]string {
	t.Helper()
	doc, err := html.Parse(strings.NewReader(page))
	if err != nil {
		t.Fatal(err)
	}
	rows := map[string][]string{}
	walk(doc, func(n *html.Node) {
		if n.Data != "section" || !hasAttr(n, "id", id) {
			return
		}
		walk(n, func(tr *html.Node) {
			if tr.Data != "tr" {
				return
			}
			var cells []string
			for c := tr.FirstChild; c != nil; c = c.NextSibling {
				if c.Type == html.ElementNode && c.Data == "td" {
					cells = append(cells, strings.ReplaceAll(text(c), "\u00a0", " "))
				}
			}
			if len(cells) > 0 {
				rows[cells[0]] = cells
			}
		})
	})
	return rows
}

func hasAttr(n *html.Node, key, val string) bool {
	for _, a := range n.Attr {
		if a.Key == key && a.Val == val {
			return true
		}
	}
	return false
}

// fixed formats v with dec decimals (strconv, independent of the report's
// own formatting), with the interval as the report writes it: "[lo, hi]",
// or "(no interval)" for NaN bounds.
func fixed(v float64, dec int) string { return strconv.FormatFloat(v, 'f', dec, 64) }

func wantCI(e *pb.Estimate, scale float64, dec int) string {
	if math.IsNaN(e.GetCiLow()) || math.IsNaN(e.GetCiHigh()) {
		return "(no interval)"
	}
	return "[" + fixed(scale*e.GetCiLow(), dec) + ", " + fixed(scale*e.GetCiHigh(), dec) + "]"
}

// TestLayoutRunReport: the page of a multi-cell run has a Layout section
// with the CLI layout table's rows (names and units as the CLI prints
// them), each holding the run's own values read from the result file: f
// with its interval and spread, noise rise, outage, soft-handover share,
// time at max power (all and at the cell edge), the handover-state table
// and one row per cell; withheld intervals read "(no interval)". The
// engine's caution note is not repeated in the verdict (the page has its
// caution box). A single-cell page has no Layout section.
func TestLayoutRunReport(t *testing.T) {
	for _, tc := range []struct {
		file       string
		intervals  bool // the fixture has intervals (2 replications)
		headerText string
	}{
		{"layout_run.json", true, "7 sites × 3 sectors, inter-site distance 750 m, with wrap-around, handover window 3.0 dB (at most 3 cells in the active set)"},
		{"layout_run1.json", false, "with wrap-around"},
	} {
		t.Run(tc.file, func(t *testing.T) {
			in := readFixture(t, tc.file)
			page := render(t, in)
			l := in.Run.GetLayout()
			o := l.GetOverall()
			if o == nil || len(l.GetCells()) != 21 {
				t.Fatalf("fixture %s: no layout or not 21 cells", tc.file)
			}
			if got := !math.IsNaN(o.GetOtherToOwn().GetCiLow()); got != tc.intervals {
				t.Fatalf("fixture %s: intervals %v, want %v", tc.file, got, tc.intervals)
			}
			rows := sectionRows(t, page, "layout")
			check := func(label string, want ...string) {
				t.Helper()
				got, ok := rows[label]
				if !ok {
					t.Errorf("no row %q in the Layout section", label)
					return
				}
				if strings.Join(got, " | ") != strings.Join(append([]string{label}, want...), " | ") {
					t.Errorf("row %q = %q, want %q", label, got[1:], want)
				}
			}
			est := func(label string, e *pb.Estimate, scale float64, dec int) {
				t.Helper()
				check(label, fixed(scale*e.GetValue(), dec), wantCI(e, scale, dec))
			}
			// Decimals as the CLI table prints them (client/render/layout.go).
			est("f", o.GetOtherToOwn(), 1, 3)
			check("f 5th pct over cells and slots", fixed(o.GetOtherToOwnSpreadP5(), 3), "")
			check("f 95th pct over cells and slots", fixed(o.GetOtherToOwnSpreadP95(), 3), "")
			est("noise rise (dB)", o.GetNoiseRiseDb(), 1, 2)
			est("outage (%)", o.GetOutageProbability(), 100, 2)
			est("soft-handover share (%)", o.GetSoftHandoverShare(), 100, 1)
			est("time at max power (%)", o.GetTimeAtMaxPower(), 100, 2)
			est("time at max power, cell edge (%)", o.GetTimeAtMaxEdge(), 100, 2)
			// At most 3 cells may be active (max_active 3): the engine's
			// "3 or more" state is exactly 3.
			if m := in.Run.GetNormalisedScenario().GetLayout().GetHandover().GetMaxActive(); m != 3 {
				t.Fatalf("fixture %s: max_active %d, want 3", tc.file, m)
			}
			if _, ok := rows["3+"]; ok {
				t.Errorf("handover row 3+ with max_active 3")
			}
			for i, name := range []string{"1", "2", "3"} {
				s, out, mx := o.GetLegShare()[i], o.GetOutageByLegs()[i], o.GetTimeAtMaxByLegs()[i]
				check(name, fixed(100*s.GetValue(), 1), wantCI(s, 100, 1), fixed(100*out.GetValue(), 2), wantCI(out, 100, 2),
					fixed(100*mx.GetValue(), 2), wantCI(mx, 100, 2))
			}
			for _, c := range l.GetCells() {
				check(c.GetName(), fixed(c.GetServedUsers(), 1), fixed(c.GetOtherToOwn().GetValue(), 3), wantCI(c.GetOtherToOwn(), 1, 3),
					fixed(c.GetOtherToOwnP50(), 3), fixed(c.GetOtherToOwnP95(), 3),
					fixed(c.GetNoiseRiseDb().GetValue(), 2), wantCI(c.GetNoiseRiseDb(), 1, 2), fixed(c.GetNoiseRiseP95Db(), 2))
			}
			if !strings.Contains(page, tc.headerText) {
				t.Errorf("page does not describe the layout as %q", tc.headerText)
			}
			if n := strings.Count(page, "(no interval)"); tc.intervals && n != 0 {
				t.Errorf("intervals given, yet %d × (no interval)", n)
			}
			// One name per figure: f is named with its JSON field once,
			// intervals are "95 % interval" as in the CLI, served users a mean.
			if n := strings.Count(page, "f (other_to_own in the JSON and CSV)"); n != 1 {
				t.Errorf("f named with its field %d times, want once", n)
			}
			for _, want := range []string{"mean served users", "95 % interval", "cells in the active set (legs)"} {
				if !strings.Contains(page, want) {
					t.Errorf("page lacks %q", want)
				}
			}
			for _, bad := range []string{"NaN", "[–", "wrap-around true", "95 % CI", "other-cell / own-cell interference f", "first drop"} {
				if strings.Contains(page, bad) {
					t.Errorf("page says %q", bad)
				}
			}
			d, err := build(in)
			if err != nil {
				t.Fatal(err)
			}
			for _, line := range d.Verdict.Lines {
				if strings.Contains(line, "do not replace") {
					t.Errorf("verdict repeats the caution: %q", line)
				}
			}
			if !strings.Contains(strings.Join(d.Verdict.Lines, "\n"), "(see layout)") {
				t.Errorf("verdict lost the engine's note pointing to the layout: %v", d.Verdict.Lines)
			}
		})
	}
	// A single-cell run: no Layout section, no layout figures.
	page := render(t, readFixture(t, "run.json"))
	if rows := sectionRows(t, page, "layout"); len(rows) != 0 || strings.Contains(page, "other-cell") || strings.Contains(page, `id="layout"`) {
		t.Errorf("single-cell page has layout rows: %v", rows)
	}
}
