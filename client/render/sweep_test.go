package render

import (
	"bytes"
	"strings"
	"testing"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// The count line of a sweep table: a run that computed every point says so;
// a resumed job shows the points stored by an earlier run beside the ones
// computed now.
func TestSweepCountLine(t *testing.T) {
	axes := []*pb.SweepAxis{{Path: "inner_loop.step_db", Values: []float64{0.5, 1, 2}}}
	pts := []*pb.SweepPoint{{Index: 0, Coordinates: []float64{0.5}}, {Index: 1, Coordinates: []float64{1}}, {Index: 2, Coordinates: []float64{2}}}
	for _, c := range []struct {
		computed int64
		want     string
	}{
		{3, "3 of 3 grid points, "},
		{1, "3 of 3 grid points (2 stored earlier, 1 computed now), "},
		{0, "3 of 3 grid points (3 stored earlier, 0 computed now), "},
	} {
		var b bytes.Buffer
		SweepTable(&b, &pb.SweepRequest{Axes: axes}, pts, &pb.SweepSummary{GridPoints: 3, PointsComputed: c.computed})
		if !strings.Contains(b.String(), c.want) {
			t.Errorf("%d computed: table starts %q, want %q", c.computed, strings.SplitN(b.String(), "\n", 2)[0], c.want)
		}
	}
}
