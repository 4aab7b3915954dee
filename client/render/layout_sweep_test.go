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

// A layout tune's condition tables have an f column (figures.other_to_own,
// the run table's 3 decimals, with its interval over replications) and
// say what f is; a single-cell tune's tables have neither.
func TestTuneTableLayoutF(t *testing.T) {
	for _, layout := range []bool{true, false} {
		rec := testRecommendation(&pb.Decision{Verdict: pb.Verdict_VERDICT_WINNER, Best: 0, Ordering: []int32{0, 1, 2}, RankedBy: stdLabel})
		if layout {
			for k, cr := range rec.GetConditions()[0].GetCandidates() {
				cr.Figures.OtherToOwn = est(1.2+0.1*float64(k), 1.1+0.1*float64(k), 1.3+0.1*float64(k))
			}
		}
		var b bytes.Buffer
		TuneTable(&b, nil, rec)
		out := b.String()
		head := tableHead(out, "  #")
		hasF := len(head) > 3 && head[len(head)-3] == "f"
		if hasF != layout || strings.Contains(out, TuneFNote) != layout {
			t.Errorf("layout %v: f column %v (head %q), note %v:\n%s", layout, hasF, head, strings.Contains(out, TuneFNote), out)
		}
		if layout {
			for _, want := range []string{"1.200 [1.100, 1.300]", "1.400 [1.300, 1.500]"} {
				if !strings.Contains(out, want) {
					t.Errorf("layout tune table lacks f %q:\n%s", want, out)
				}
			}
		}
	}
}
