package loop

import (
	"context"
	"testing"
	"time"
)

func BenchmarkScratchStatic(b *testing.B) {
	sc := CanonicalScenario()
	us, _ := placeUsers(sc)
	st := make([]float64, len(us))
	for i, u := range us {
		st[i] = dbToLin(-u.pathLossDB)
	}
	b.ReportAllocs()
	for b.Loop() {
		r, err := run(context.Background(), sc, RunOptions{}, &hooks{static: st})
		if err != nil {
			b.Fatal(err)
		}
		_ = r
	}
	b.ReportMetric(float64(64*90000)*float64(b.N)/b.Elapsed().Seconds(), "user-slots/s")
}

func TestScratchPrint(t *testing.T) {
	for _, gen := range []Generator{GeneratorSpectral} {
		sc := CanonicalScenario()
		sc.Groups[0].Generator = gen
		r, err := Run(context.Background(), sc, RunOptions{})
		if err != nil {
			t.Fatal(err)
		}
		a := r.Aggregate
		t.Logf("%v mean %+v\nstd %+v\nout %+v\ntx %+v\np50 %+v bler %+v conv %+v nr %+v feas %+v notes %v", gen, a.SIRErrorMeanDB, a.SIRErrorStdDB, a.OutageProbability, a.TxPowerMeanDBm, a.SIRErrorPercentilesDB.P50, a.AchievedBLER, a.ConvergenceTimeS, a.NoiseRiseMeanDB, r.Feasibility, r.Notes)
	}
}

func TestScratchPar(t *testing.T) {
	sc := CanonicalScenario()
	for i := 0; i < 5; i++ {

		t0 := time.Now()
		Run(context.Background(), sc, RunOptions{})
		t.Logf("total %v", time.Since(t0))
	}
}
