package tune

import (
	"context"
	"testing"
	"time"

	"github.com/fadeloop/fadeloop/loop"
)

// benchRequest is the benchmark: a 4 × 3 grid (step × update rate)
// over 3 speed conditions of a 16-user, 10-second scenario (the canonical
// cell with 16 users).
func benchRequest() Request {
	base := loop.CanonicalScenario()
	base.Groups[0].Count = 16
	base.Run.Slots = 0
	base.Run.DurationS = 10
	base.Run.WarmupSlots = 150
	return Request{
		Base: base,
		Axes: []Axis{
			{Path: "inner_loop.step_db", Values: []float64{0.5, 1, 2, 3}},
			{Path: "inner_loop.update_rate_hz", Values: []float64{500, 1000, 1500}},
		},
		Conditions: []Condition{speedCond("3 km/h", 3), speedCond("30 km/h", 30), speedCond("120 km/h", 120)},
		Objective:  Objective{Kind: ObjectiveMinSIRErrorStd},
		Budget:     Budget{MaxReplications: 32},
	}
}

// BenchmarkTuneGrid runs the sequential procedure and, for comparison,
// every candidate to the largest replication count the sequential run
// reached (the same final precision). Metrics: candidate-runs/s (baseline
// runs included), wall-s per tuning, the replications of both and their
// ratio (sequential / equal allocation).
func BenchmarkTuneGrid(b *testing.B) {
	b.ReportAllocs()
	var rec *Recommendation
	var runs int
	start := time.Now()
	for b.Loop() {
		var err error
		rec, err = Tune(context.Background(), benchRequest(), Options{})
		if err != nil {
			b.Fatal(err)
		}
		runs += rec.Effort.Replications + rec.Effort.BaselineReplications
	}
	wall := time.Since(start).Seconds()
	b.ReportMetric(float64(runs)/wall, "candidate-runs/s")
	b.ReportMetric(wall/float64(b.N), "wall-s")
	b.ReportMetric(float64(rec.Effort.Replications), "seq-replications")
	b.ReportMetric(float64(rec.Effort.MaxReplicationsUsed), "max-reps")

	// Equal allocation to the same final precision, measured once.
	eq := benchRequest()
	eq.Budget = Budget{MinReplications: rec.Effort.MaxReplicationsUsed, MaxReplications: rec.Effort.MaxReplicationsUsed}
	eq.SkipBaseline = true
	t0 := time.Now()
	full, err := Tune(context.Background(), eq, Options{})
	if err != nil {
		b.Fatal(err)
	}
	b.ReportMetric(time.Since(t0).Seconds(), "equal-wall-s")
	b.ReportMetric(float64(full.Effort.Replications), "equal-replications")
	b.ReportMetric(float64(rec.Effort.Replications)/float64(full.Effort.Replications), "replication-ratio")
	if full.Overall.Best != rec.Overall.Best {
		b.Logf("equal allocation picks %s, sequential %s", full.Candidates[full.Overall.Best].Label(), rec.Candidates[rec.Overall.Best].Label())
	}
	b.Logf("sequential: %s", rec.Overall.Reason)
	for _, c := range rec.Conditions {
		b.Logf("%s: %s", c.Name, c.Decision.Reason)
	}
}
