package tune

import (
	"strings"
	"testing"
)

// TestFigureLabelEstimateWithoutInterval: an estimate from fewer than two
// replications (capacity with replications 1) prints its value and says it
// has no interval instead of a zero-width "[v, v]"; from two or more it
// prints the Student-t interval.
func TestFigureLabelEstimateWithoutInterval(t *testing.T) {
	l := FigureLabelOf(FigureOutage)
	for _, c := range []struct {
		e    ReplicationEstimate
		want string
	}{
		{ReplicationEstimate{Mean: 0.0312, Low: 0.0312, High: 0.0312, N: 1}, "3.12 % (no interval: 1 replication)"},
		{ReplicationEstimate{Mean: 0.0312, Low: 0.0280, High: 0.0340, N: 4}, "3.12 [2.80, 3.40] %"},
	} {
		got := l.Estimate(c.e)
		if got != c.want {
			t.Errorf("N = %d: %q, want %q", c.e.N, got, c.want)
		}
		if c.e.N < 2 && strings.Contains(got, "[") {
			t.Errorf("N = %d: %q prints an interval", c.e.N, got)
		}
	}
}
