package render

import (
	"bytes"
	"strings"
	"testing"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// tableHead splits a CLI table's head line into its column names (columns
// are separated by two or more spaces; a name has single spaces at most).
func tableHead(out, first string) []string {
	for _, l := range strings.Split(out, "\n") {
		if strings.HasPrefix(l, first) {
			var h []string
			for _, f := range strings.Split(l, "  ") {
				if f = strings.TrimSpace(f); f != "" {
					h = append(h, f)
				}
			}
			return h
		}
	}
	return nil
}

// A layout sweep's table has the layout's f and soft-handover share with
// their 95 % intervals, under the names the run's layout table gives them
// (LayoutParts), and says what f is; a single-cell sweep's table keeps its
// columns. The values are csvTestReport's (f 1.5 [1.4, 1.6], share 0.3
// [0.28, 0.32]) in the run table's decimals (f 3, share 1, in %).
func TestSweepTableLayoutFigures(t *testing.T) {
	runNames := map[string]bool{}
	for _, r := range LayoutParts(csvTestReport(true), ci)[0].Rows {
		runNames[r[0]] = true
	}
	for _, tc := range []struct {
		name   string
		layout bool
	}{{"layout", true}, {"single cell", false}} {
		var b bytes.Buffer
		pts := []*pb.SweepPoint{{Index: 0, Coordinates: []float64{3}, Report: csvTestReport(tc.layout)}}
		SweepTable(&b, &pb.SweepRequest{Axes: []*pb.SweepAxis{{Path: "layout.handover.window_db"}}}, pts, nil)
		out := b.String()
		head := tableHead(out, "point")
		if len(head) < 2 || head[len(head)-1] != "load" {
			t.Fatalf("%s: head %q", tc.name, head)
		}
		extra := head[len(head)-3 : len(head)-1]
		if !tc.layout {
			if strings.Contains(out, "soft-handover") || extra[1] == "f" || strings.Contains(out, LayoutFNote) {
				t.Errorf("single-cell sweep table has layout columns:\n%s", out)
			}
			continue
		}
		for i, want := range []string{"f", "soft-handover share (%)"} {
			if extra[i] != want || !runNames[want] {
				t.Errorf("layout column %d = %q, want %q (a row of the run's layout table: %v)", i, extra[i], want, runNames[want])
			}
		}
		for _, want := range []string{"1.500 [1.400, 1.600]", "30.0 [28.0, 32.0]", LayoutFNote} {
			if !strings.Contains(out, want) {
				t.Errorf("layout sweep table lacks %q:\n%s", want, out)
			}
		}
	}
}
