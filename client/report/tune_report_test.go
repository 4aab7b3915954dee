package report

import (
	"fmt"
	"strings"
	"testing"

	"golang.org/x/net/html"

	clirender "github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// tune_layout_unmet.json is a real output of the CLI on the README's
// multi-cell example, where no candidate meets the constraints:
//
//	fadeloop example --multi-cell > town.yaml
//	fadeloop tune town.yaml --axis layout.handover.window_db=2,4,6 --objective power --outage-limit 0.12 --slots 1500 --max-reps 4 --format json --out tune_layout_unmet.json

// sectionTables returns the tables of the section with that id, each as
// rows of cell texts (header row first; non-breaking spaces as spaces).
func sectionTables(doc *html.Node, id string) [][][]string {
	var out [][][]string
	walk(doc, func(n *html.Node) {
		if n.Data != "section" {
			return
		}
		for _, a := range n.Attr {
			if a.Key != "id" || a.Val != id {
				continue
			}
			walk(n, func(tb *html.Node) {
				if tb.Data != "table" {
					return
				}
				var rows [][]string
				walk(tb, func(tr *html.Node) {
					if tr.Data != "tr" {
						return
					}
					var cells []string
					for c := tr.FirstChild; c != nil; c = c.NextSibling {
						if c.Type == html.ElementNode && (c.Data == "td" || c.Data == "th") {
							cells = append(cells, strings.ReplaceAll(strings.TrimSpace(text(c)), "\u00a0", " "))
						}
					}
					rows = append(rows, cells)
				})
				out = append(out, rows)
			})
		}
	})
	return out
}

func colOf(t *testing.T, head []string, name string) int {
	t.Helper()
	for i, h := range head {
		if h == name {
			return i
		}
	}
	t.Fatalf("no column %q in %q", name, head)
	return -1
}

// TestTuneReportRankedColumn: the HTML report heads the ranked column by
// what it holds, with the CLI's words and unit. With constraints unmet
// (the layout fixture) that is the worst constraint excess in % of limit,
// the real mean Tx power keeps its own column, statuses say "misses
// constraints" as the CLI does (never "infeasible", the engine's load
// flag), the recommended (closest) candidate comes first with the smallest
// excess, and the missing fixed-power baseline of multi-cell mode is
// explained. The expected cells are the CLI table's for the same result
// (fadeloop tune … --format table on the same job store).
func TestTuneReportRankedColumn(t *testing.T) {
	layoutReq := &pb.TuneRequest{
		Base: &pb.Scenario{Name: "town", Layout: &pb.Layout{Sites: 7, SectorsPerSite: 3}},
		Axes: []*pb.SweepAxis{{Path: "layout.handover.window_db", Values: []float64{2, 4, 6}}},
	}
	tests := []struct {
		file      string
		req       *pb.TuneRequest
		condHead  string   // the ranked column of the conditions table
		diffHead  string   // its runner-up column
		candHeads []string // columns the candidate table must have
		firstRow  []string // cells of the recommended row, by candidate-table column
		never     []string // text the page must not contain
		notes     []string // text the page must contain
	}{
		{
			file:      "tune_layout_unmet.json",
			req:       layoutReq,
			condHead:  "worst constraint excess (% of limit)",
			diffHead:  "runner-up − recommended (% of limit)",
			candHeads: []string{"worst constraint excess (% of limit)", "mean Tx power (dBm)", "− recommended (% of limit)"},
			firstRow: []string{"setting", "window_db=6", "worst constraint excess (% of limit)", "132.1 [112.7, 151.6]",
				"mean Tx power (dBm)", "-13.56 [-15.69, -11.43]", "status", "contending, misses constraints"},
			never: []string{"infeasible", "diff to best (dBm)", "percentage points worse"},
			notes: []string{"no fixed-power baseline is run in multi-cell mode", "2 rounds"},
		},
		{
			file:      "tune.json",
			condHead:  "SIR error std (dB)",
			diffHead:  "runner-up − recommended (dB)",
			candHeads: []string{"SIR error std (dB)", "outage (%)", "− recommended (dB)"}, // a result without API labels: the client's own
			never:     []string{"worst constraint excess", "no fixed-power baseline"},
		},
	}
	for _, tc := range tests {
		t.Run(tc.file, func(t *testing.T) {
			in := readFixture(t, tc.file)
			in.TuneRequest = tc.req
			doc, err := html.Parse(strings.NewReader(render(t, in)))
			if err != nil {
				t.Fatal(err)
			}
			body := strings.ReplaceAll(text(doc), "\u00a0", " ")
			cond := sectionTables(doc, "conditions")
			if len(cond) != 1 || len(cond[0]) < 2 {
				t.Fatalf("conditions tables %q", cond)
			}
			if h := cond[0][0]; h[4] != tc.condHead || h[5] != tc.diffHead {
				t.Errorf("conditions columns %q, %q; want %q, %q", h[4], h[5], tc.condHead, tc.diffHead)
			}
			cands := sectionTables(doc, "candidates")
			if len(cands) == 0 {
				t.Fatal("no candidate table")
			}
			last := cands[len(cands)-1] // a condition's table (per-figure columns)
			for _, h := range tc.candHeads {
				colOf(t, last[0], h)
			}
			for i := 0; i+1 < len(tc.firstRow); i += 2 {
				if got := last[1][colOf(t, last[0], tc.firstRow[i])]; got != tc.firstRow[i+1] {
					t.Errorf("recommended row, %s: %q, want %q", tc.firstRow[i], got, tc.firstRow[i+1])
				}
			}
			// The recommended row leads and has the smallest ranked figure.
			rc := colOf(t, last[0], tc.candHeads[0])
			lead := leadingNumber(t, last[1][rc])
			for _, row := range last[2:] {
				if v := leadingNumber(t, row[rc]); v < lead {
					t.Errorf("row %q ranks after the recommended one with a smaller %s", row[:2], tc.candHeads[0])
				}
			}
			for _, n := range tc.never {
				if strings.Contains(body, n) {
					t.Errorf("page says %q", n)
				}
			}
			for _, n := range tc.notes {
				if !strings.Contains(body, n) {
					t.Errorf("page does not say %q", n)
				}
			}
		})
	}
}

func leadingNumber(t *testing.T, cell string) float64 {
	t.Helper()
	f := strings.Fields(cell)
	if len(f) == 0 {
		t.Fatalf("empty cell")
	}
	var v float64
	if _, err := fmt.Sscan(f[0], &v); err != nil {
		t.Fatalf("cell %q: %v", cell, err)
	}
	return v
}

// TestTuneConditionFacts: the f_D·T of a condition reads the same in the
// CLI table, the HTML conditions table and the HTML note (its users'
// range, from their speeds), and the notes state measurements only: the
// engine's plain-language reason, which adds why a step did best (limit
// cycle, fading regime, "cannot follow the fades"), is not shown. f_D·T
// is checked against the Doppler shift f_D = v·f_c/c (common practice)
// with T = 1/1500 s (both fixtures' update rate) and each fixture's
// carrier; 4 decimals, as the tables print it.
func TestTuneConditionFacts(t *testing.T) {
	fdt := func(kmh, fc float64) float64 { return kmh / 3.6 * fc / 299792458 / 1500 }
	for _, tc := range []struct {
		file string
		cell string // the f_D·T cell of the first condition
		note string // its note, or "" when no note is checked
	}{
		// The multi-cell example: 3 and 50 km/h at 1.95 GHz.
		{"tune_layout_unmet.json", fixed(fdt(3, 1.95e9), 4) + "–" + fixed(fdt(50, 1.95e9), 4),
			"base: f_D·T " + fixed(fdt(3, 1.95e9), 4) + "–" + fixed(fdt(50, 1.95e9), 4) + " over its users (3 and 50 km/h)."},
		// An older result without the smallest f_D·T or the speeds: its
		// largest alone (3 km/h at 2 GHz).
		{"tune.json", fixed(fdt(3, 2e9), 4), ""},
	} {
		t.Run(tc.file, func(t *testing.T) {
			in := readFixture(t, tc.file)
			page := render(t, in)
			doc, err := html.Parse(strings.NewReader(page))
			if err != nil {
				t.Fatal(err)
			}
			rows := sectionTables(doc, "conditions")[0]
			if h, r := rows[0], rows[1]; h[len(h)-1] != "f_D·T" || r[len(r)-1] != tc.cell {
				t.Errorf("HTML f_D·T %q (head %q), want %q", r[len(r)-1], h[len(h)-1], tc.cell)
			}
			var cli strings.Builder
			clirender.TuneTable(&cli, in.TuneRequest, in.Tune)
			if tc.note != "" && !strings.Contains(cli.String(), "  "+tc.cell+"\n") { // the CLI reads current results only
				t.Errorf("CLI table lacks the f_D·T %q:\n%s", tc.cell, cli.String())
			}
			body := text(doc)
			if tc.note != "" && !strings.Contains(body, tc.note) {
				t.Errorf("page lacks the note %q", tc.note)
			}
			for _, bad := range []string{"limit cycle", "fading regime", "cannot follow", "did best", "balances", "dominate"} {
				if strings.Contains(body, bad) || strings.Contains(cli.String(), bad) {
					t.Errorf("an explanation (%q) is shown", bad)
				}
			}
		})
	}
}
