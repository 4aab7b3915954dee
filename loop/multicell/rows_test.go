package multicell

import (
	"gonum.org/v1/gonum/floats"

	"context"
	"math"
	"math/rand/v2"
	"testing"
)

// TestAddScaledAVXMatchesGo: the assembly row update gives the same bits as
// gonum's floats.AddScaled (the reference library) for every length a
// layout can have (the 8-wide loop and its tail), including subnormal and
// large values.
func TestAddScaledAVXMatchesGo(t *testing.T) {
	if !useAVX {
		t.Skip("no AVX on this machine: only the Go code runs")
	}
	r := rand.New(rand.NewPCG(3, 4))
	for n := 0; n <= 70; n++ {
		for trial := 0; trial < 20; trial++ {
			row := make([]float64, n+3)
			base := make([]float64, n)
			for i := range row {
				row[i] = math.Exp(r.NormFloat64()*20) * float64(1-2*r.IntN(2))
			}
			for i := range base {
				base[i] = math.Exp(r.NormFloat64() * 10)
			}
			if trial == 0 && n > 0 {
				row[0] = 5e-324 // subnormal
			}
			d := r.NormFloat64() * math.Exp(r.NormFloat64()*5)
			got, want := append([]float64(nil), base...), append([]float64(nil), base...)
			addScaled(got, d, row)
			floats.AddScaled(want, d, row[:n])
			for i := range got {
				if math.Float64bits(got[i]) != math.Float64bits(want[i]) {
					t.Fatalf("n=%d element %d: AVX %v, Go %v", n, i, got[i], want[i])
				}
			}
		}
	}
}

// TestReportSameWithoutAVX: a run's report is identical with and without
// the assembly row update.
func TestReportSameWithoutAVX(t *testing.T) {
	if !useAVX {
		t.Skip("no AVX on this machine: only the Go code runs")
	}
	cfg := smallLayout()
	cfg.Run = RunSettings{Slots: 400, WarmupSlots: 50, Replications: 1, Seed: 5, Batches: 4}
	run := func(avx bool) []byte {
		defer func(v bool) { useAVX = v }(useAVX)
		useAVX = avx
		rep, err := Run(context.Background(), cfg)
		if err != nil {
			t.Fatal(err)
		}
		return reportText(rep)
	}
	if string(run(true)) != string(run(false)) {
		t.Error("report differs between the assembly and the Go row update")
	}
}
