package loop

import (
	"math"
	"testing"
)

// TestReplicationsPooled: with several replications the figures are those
// of all replications' samples together (README "What it computes"), not
// averages of per-replication values. Replication r of seed s is exactly
// the single-replication run of seed repSeed(s, r), so the pooled figures
// follow from the single runs' figures and sample counts (exact identities
// of pooled moments and proportions).
func TestReplicationsPooled(t *testing.T) {
	sc := baseScenario(3, 6000)
	sc.Groups[0].Speeds[0].SpeedKmh = 3
	sc.Groups[0].ActivityFactor, sc.Groups[0].MeanBurstSlots = 0.7, 300 // unequal sample counts per replication
	sc.InnerLoop.MaxPowerDBm = 10
	sc.Run.Replications = 2
	sc.Normalise()
	pooled := mustRun(t, sc, nil, RunOptions{}).Aggregate
	var single [2]Figures
	for r := range single {
		one := sc
		one.Run.Replications = 1
		one.Run.Seed = repSeed(sc.Run.Seed, r)
		single[r] = mustRun(t, one, nil, RunOptions{}).Aggregate
	}
	n1, n2 := float64(single[0].UserSlots), float64(single[1].UserSlots)
	N := n1 + n2
	if n1 == n2 || pooled.UserSlots != single[0].UserSlots+single[1].UserSlots {
		t.Fatalf("user-slots %v + %v vs %v (want unequal counts summing up)", n1, n2, pooled.UserSlots)
	}
	w := func(a, b float64) float64 { return (n1*a + n2*b) / N }
	m := w(single[0].SIRErrorMeanDB.Value, single[1].SIRErrorMeanDB.Value)
	sq := func(f Figures) float64 {
		return f.SIRErrorStdDB.Value*f.SIRErrorStdDB.Value + f.SIRErrorMeanDB.Value*f.SIRErrorMeanDB.Value
	}
	std := math.Sqrt(w(sq(single[0]), sq(single[1])) - m*m)
	pow := linToDB(w(dbToLin(single[0].TxPowerMeanDBm.Value), dbToLin(single[1].TxPowerMeanDBm.Value)))
	for _, c := range []struct {
		name      string
		got, want float64
	}{
		{"sir_error_mean_db", pooled.SIRErrorMeanDB.Value, m},
		{"sir_error_std_db", pooled.SIRErrorStdDB.Value, std},
		{"outage_probability", pooled.OutageProbability.Value, w(single[0].OutageProbability.Value, single[1].OutageProbability.Value)},
		{"max_power_fraction", pooled.MaxPowerFraction.Value, w(single[0].MaxPowerFraction.Value, single[1].MaxPowerFraction.Value)},
		{"tx_power_mean_dbm", pooled.TxPowerMeanDBm.Value, pow},
	} {
		if math.Abs(c.got-c.want) > 1e-9 {
			t.Errorf("%s pooled %.12g, want %.12g from the single replications", c.name, c.got, c.want)
		}
	}
	// The pooled median lies between the replications' medians.
	a, b := single[0].SIRErrorPercentilesDB.P50.Value, single[1].SIRErrorPercentilesDB.P50.Value
	if p := pooled.SIRErrorPercentilesDB.P50.Value; p < math.Min(a, b)-binDB || p > math.Max(a, b)+binDB {
		t.Errorf("pooled median %g outside [%g, %g]", p, a, b)
	}
	// Averaging the std would differ from pooling whenever the means differ.
	avg := (single[0].SIRErrorStdDB.Value + single[1].SIRErrorStdDB.Value) / 2
	t.Logf("std pooled %.4f dB, average of replications %.4f dB", pooled.SIRErrorStdDB.Value, avg)
}
