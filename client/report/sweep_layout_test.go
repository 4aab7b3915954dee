package report

import (
	"strings"
	"testing"

	"golang.org/x/net/html"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// sectionHead returns the column heads (th texts) of the first table in the
// page's section with the given id.
func sectionHead(t *testing.T, page, id string) []string {
	t.Helper()
	doc, err := html.Parse(strings.NewReader(page))
	if err != nil {
		t.Fatal(err)
	}
	var head []string
	walk(doc, func(n *html.Node) {
		if n.Data != "section" || !hasAttr(n, "id", id) || head != nil {
			return
		}
		walk(n, func(th *html.Node) {
			if th.Data == "th" {
				head = append(head, strings.Join(strings.Fields(text(th)), " "))
			}
		})
	})
	return head
}

// TestSweepLayoutPoints: the "Grid points" table of a layout sweep has f
// and the soft-handover share with their intervals, named as the Layout
// section of a run page names them, with the run report's own values
// (layout_run.json, a real CLI output); a single-cell sweep's table
// (sweep.json) has neither column.
func TestSweepLayoutPoints(t *testing.T) {
	rep := readFixture(t, "layout_run.json").Run
	o := rep.GetLayout().GetOverall()
	in := Input{Sweep: &Sweep{Axes: []*pb.SweepAxis{{Path: "layout.handover.window_db", Values: []float64{3}}},
		Points: []*pb.SweepPoint{{Index: 0, Seed: 1, Coordinates: []float64{3}, Report: rep}}}}
	page := render(t, in)
	head := sectionHead(t, page, "points")
	row := sectionRows(t, page, "points")["0"]
	if len(row) != len(head) {
		t.Fatalf("points table: head %q, row %q", head, row)
	}
	runRows := sectionRows(t, render(t, Input{Run: rep}), "layout")
	col := func(name string) string {
		for i, h := range head {
			if h == name {
				return row[i]
			}
		}
		t.Errorf("points table has no column %q: %q", name, head)
		return ""
	}
	// Decimals as the run's layout table (client/render/layout.go): f 3,
	// the share in % with 1.
	for _, c := range []struct {
		name  string
		e     *pb.Estimate
		scale float64
		dec   int
	}{{"f", o.GetOtherToOwn(), 1, 3}, {"soft-handover share (%)", o.GetSoftHandoverShare(), 100, 1}} {
		want := fixed(c.scale*c.e.GetValue(), c.dec) + " " + strings.TrimPrefix(wantCI(c.e, c.scale, c.dec), "(no interval)")
		if got := col(c.name); got != want {
			t.Errorf("%s = %q, want %q", c.name, got, want)
		}
		if _, ok := runRows[c.name]; !ok {
			t.Errorf("the run page's Layout section has no row %q: the names differ", c.name)
		}
	}
	if !strings.Contains(page, "other_to_own in the JSON and CSV") {
		t.Error("the layout sweep page does not say what f is")
	}

	single := render(t, readFixture(t, "sweep.json"))
	for _, h := range sectionHead(t, single, "points") {
		if h == "f" || strings.Contains(h, "soft-handover") {
			t.Errorf("single-cell sweep table has layout column %q", h)
		}
	}
}

// TestTuneLayoutF: a layout tune page's condition tables have an f column
// with each candidate's figures.other_to_own (3 decimals, its interval over
// replications) and say what f is; the overall table and a single-cell
// tune's tables (tune.json) have none. f is set here on the layout fixture
// (tune_layout_unmet.json, a real output from before f was sent).
func TestTuneLayoutF(t *testing.T) {
	in := readFixture(t, "tune_layout_unmet.json")
	conds := in.Tune.GetConditions()
	if len(conds) == 0 {
		t.Fatal("fixture has no condition")
	}
	for k, cr := range conds[0].GetCandidates() {
		cr.Figures.OtherToOwn = &pb.ReplicationEstimate{Mean: 1.2 + float64(k), Low: 1.1 + float64(k), High: 1.3 + float64(k), N: 3}
	}
	page := render(t, in)
	doc, err := html.Parse(strings.NewReader(page))
	if err != nil {
		t.Fatal(err)
	}
	var fTables int
	walk(doc, func(n *html.Node) {
		if n.Data != "table" {
			return
		}
		var head []string
		walk(n, func(th *html.Node) {
			if th.Data == "th" {
				head = append(head, strings.Join(strings.Fields(text(th)), " "))
			}
		})
		for _, h := range head {
			if h == "f" {
				fTables++
			}
		}
	})
	if fTables != len(conds) {
		t.Errorf("%d tables with an f column, want one per condition (%d)", fTables, len(conds))
	}
	for _, want := range []string{"1.200 [1.100,\u00a01.300]", "figures.other_to_own in the JSON"} {
		if !strings.Contains(page, want) {
			t.Errorf("layout tune page lacks %q", want)
		}
	}
	if single := render(t, readFixture(t, "tune.json")); strings.Contains(single, "other_to_own") || strings.Contains(single, "<th>f</th>") {
		t.Error("single-cell tune page has an f column")
	}
}
