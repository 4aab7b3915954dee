package service

import (
	"testing"

	"github.com/fadeloop/fadeloop/loop/tune"
)

// TuneFigures.other_to_own carries a layout candidate's f over
// replications unchanged, and stays unset for a single cell (a client
// reading 0 would show an f the engine never measured).
func TestTuneFiguresOtherToOwn(t *testing.T) {
	f := tune.ReplicationEstimate{Mean: 1.5, Low: 1.25, High: 1.75, N: 3}
	m := tuneFiguresToProto(tune.TuneFigures{OtherToOwn: &f})
	if e := m.GetOtherToOwn(); e == nil || e.GetMean() != 1.5 || e.GetLow() != 1.25 || e.GetHigh() != 1.75 || e.GetN() != 3 {
		t.Errorf("layout: other_to_own = %v, want 1.5 [1.25, 1.75] n 3", e)
	}
	if m := tuneFiguresToProto(tune.TuneFigures{}); m.OtherToOwn != nil {
		t.Errorf("single cell: other_to_own = %v, want unset", m.OtherToOwn)
	}
}
