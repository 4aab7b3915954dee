package render

import (
	"bytes"
	"strings"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// Every run and sweep table, single cell and layout alike, ends with the
// caution about real transmitters (loop.Caution, the house rule in
// COMMON.md) exactly once, in its one wording, and never among the
// notes; a layout report's engine note carrying it is not printed again.
func TestCautionOncePerTable(t *testing.T) {
	axes := []*pb.SweepAxis{{Path: "inner_loop.step_db", Values: []float64{0.5}}}
	for _, tc := range []struct {
		name  string
		write func(w *bytes.Buffer)
	}{
		{"run, single cell", func(w *bytes.Buffer) { RunTable(w, csvTestReport(false), true) }},
		{"run, layout", func(w *bytes.Buffer) {
			rep := csvTestReport(true)
			rep.Notes = append(rep.Notes, loop.Caution)
			RunTable(w, rep, false)
		}},
		{"run, not simulated", func(w *bytes.Buffer) {
			RunTable(w, &pb.RunReport{Feasibility: &pb.Feasibility{Infeasible: true}, Aggregate: &pb.Figures{}}, false)
		}},
		{"sweep, single cell", func(w *bytes.Buffer) {
			SweepTable(w, &pb.SweepRequest{Axes: axes}, []*pb.SweepPoint{{Index: 0, Coordinates: []float64{0.5}, Report: csvTestReport(false)}},
				&pb.SweepSummary{GridPoints: 1, PointsComputed: 1})
		}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var b bytes.Buffer
			tc.write(&b)
			out := strings.Join(strings.Fields(b.String()), " ")
			if n := strings.Count(out, loop.Caution); n != 1 {
				t.Errorf("caution %d times, want once:\n%s", n, b.String())
			}
			if n := strings.Count(strings.ToLower(out), "do not replace"); n != 1 {
				t.Errorf("%d cautions in any wording, want 1:\n%s", n, b.String())
			}
			if !strings.HasSuffix(out, loop.Caution) {
				t.Errorf("the caution is not the last line:\n%s", b.String())
			}
		})
	}
}
