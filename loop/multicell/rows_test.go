package multicell

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"
)

// TestAddScaledAVXMatchesGo: the assembly row update gives the same bits as
// the Go code for every length a layout can have (the 8-wide loop and its
// tail), including subnormal and large values.
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
			addScaledGo(want, d, row)
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

// TestLeanSlotsSameReport: runUsersLean gives the same report as runUsers
// for the slots it takes, with and without SIR estimation and command
// errors, for feedback delays of 0, 1 and 3 slots and one to three legs.
func TestLeanSlotsSameReport(t *testing.T) {
	for _, tc := range []struct {
		name           string
		delay, legs    int
		cep, sigmaDB   float64
		outerLoop, avx bool
	}{
		{"delay 1, errors", 1, 3, 0.04, 1, true, true},
		{"delay 0, no errors", 0, 3, 0, 0, true, true},
		{"delay 3, one leg", 3, 1, 0.1, 2, false, true},
		{"delay 1, two legs, Go rows", 1, 2, 0, 1, true, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			cfg := smallLayout()
			cfg.Groups[0].CountPerCell = 4
			cfg.InnerLoop.FeedbackDelaySlots = tc.delay
			cfg.InnerLoop.CommandErrorProb = tc.cep
			cfg.InnerLoop.SIREstimationErrorDB = tc.sigmaDB
			cfg.Handover.MaxActive = tc.legs
			cfg.OuterLoop.Enabled = tc.outerLoop
			cfg.Run = RunSettings{Slots: 700, WarmupSlots: 100, Replications: 1, Seed: 8, Batches: 4}
			run := func(lean bool) []byte {
				defer func(l, a bool) { useLean, useAVX = l, a }(useLean, useAVX)
				useLean, useAVX = lean, useAVX && tc.avx
				rep, err := Run(context.Background(), cfg)
				if err != nil {
					t.Fatal(err)
				}
				return reportText(rep)
			}
			if string(run(true)) != string(run(false)) {
				t.Error("report differs between the lean and the general slot loop")
			}
		})
	}
}
