package loop

import (
	"context"
	"syscall"
	"testing"
	"time"
)

// cpuTime is the process's user + system CPU time.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// BenchmarkCanonical runs CanonicalScenario (the scenario of
// shared/bench/peer_numba.py: 64 users, 3 taps, 30 km/h at 2 GHz, 1500 Hz,
// 90 000 slots) and reports user-slots/s (warm-up included, as the peer
// counts them) next to the peer's figures of merit.
func BenchmarkCanonical(b *testing.B) { benchCanonical(b, CanonicalScenario()) }

// BenchmarkCanonicalDefaultGenerator is BenchmarkCanonical with fading's
// default generator (fewer sinusoids, statistically closer to Rayleigh
// than the peer's sixteen) instead of the peer's model.
func BenchmarkCanonicalDefaultGenerator(b *testing.B) {
	sc := CanonicalScenario()
	sc.Groups[0].Generator = GeneratorDefault
	benchCanonical(b, sc)
}

func benchCanonical(b *testing.B, sc Scenario) {
	b.ReportAllocs()
	var rep *Report
	c0 := cpuTime()
	for b.Loop() {
		r, err := Run(context.Background(), sc, RunOptions{})
		if err != nil {
			b.Fatal(err)
		}
		rep = r
	}
	us := float64(rep.SimulatedUserSlots) * float64(b.N) / b.Elapsed().Seconds()
	b.ReportMetric(us, "user-slots/s")
	b.ReportMetric((cpuTime()-c0).Seconds()*1e3/float64(b.N), "cpu-ms/op")
	b.ReportMetric(rep.Aggregate.SIRErrorStdDB.Value, "sir-err-std-dB")
	b.ReportMetric(rep.Aggregate.OutageProbability.Value, "outage")
}

// BenchmarkLoopStatic runs the canonical scenario's loop over static
// channels (each user's mean path loss, no fading): the cost of the
// sequential loop and the figures alone, without channel generation.
func BenchmarkLoopStatic(b *testing.B) {
	sc := CanonicalScenario()
	us, err := placeUsers(sc)
	if err != nil {
		b.Fatal(err)
	}
	st := make([]float64, len(us))
	for i, u := range us {
		st[i] = dbToLin(-u.pathLossDB)
	}
	b.ReportAllocs()
	c0 := cpuTime()
	for b.Loop() {
		if _, err := run(context.Background(), sc, RunOptions{}, &hooks{static: st}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(len(us))*float64(sc.Run.Slots)*float64(b.N)/b.Elapsed().Seconds(), "user-slots/s")
	b.ReportMetric((cpuTime()-c0).Seconds()*1e3/float64(b.N), "cpu-ms/op")
}
