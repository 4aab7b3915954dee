package loop

import (
	"context"
	"testing"
)

// BenchmarkCanonical runs CanonicalScenario (the scenario of
// shared/bench/peer_numba.py: 64 users, 3 taps, 30 km/h at 2 GHz, 1500 Hz,
// 90 000 slots) and reports user-slots/s (warm-up included, as the peer
// counts them) next to the peer's figures of merit.
func BenchmarkCanonical(b *testing.B) {
	sc := CanonicalScenario()
	b.ReportAllocs()
	var rep *Report
	for b.Loop() {
		r, err := Run(context.Background(), sc, RunOptions{})
		if err != nil {
			b.Fatal(err)
		}
		rep = r
	}
	us := float64(rep.SimulatedUserSlots) * float64(b.N) / b.Elapsed().Seconds()
	b.ReportMetric(us, "user-slots/s")
	b.ReportMetric(rep.Aggregate.SIRErrorStdDB.Value, "sir-err-std-dB")
	b.ReportMetric(rep.Aggregate.OutageProbability.Value, "outage")
}
