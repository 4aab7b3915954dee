package tune

import (
	"context"
	"errors"
	"math"
	"reflect"
	"sync/atomic"
	"testing"

	"github.com/fadeloop/fadeloop/fading"
)

// synthetic builds an engine over candidates whose SIR error std under
// condition c, replication r, is mu[c][k] + common(c, r) + own(k, c, r)·sd:
// the common term is shared by every candidate (common random numbers), the
// own term is independent per candidate.
func synthetic(mu [][]float64, sd float64, seed uint64) *engine {
	nC, nK := len(mu), len(mu[0])
	w := make([]float64, nC)
	for c := range w {
		w[c] = 1 / float64(nC)
	}
	return &engine{
		nK: nK, nC: nC, w: w,
		obj:     Objective{Kind: ObjectiveMinSIRErrorStd},
		conf:    0.95,
		minReps: 3, maxReps: 40, batch: 2,
		jobCost: func(k, c int) int64 { return 100 },
		tieLess: func(a, b int) bool { return a < b },
		run: func(ctx context.Context, k, c, r int) (Sample, error) {
			if err := ctx.Err(); err != nil {
				return Sample{}, err
			}
			common := fading.NewStream(seed, c, r, 1).NormFloat64()
			own := fading.NewStream(seed, 1000+k, r*64+c, 2).NormFloat64()
			return Sample{SIRErrorStdDB: mu[c][k] + common + sd*own, UserSlots: 100}, nil
		},
	}
}

func TestEngineSyntheticDecisions(t *testing.T) {
	tests := []struct {
		name     string
		mu       [][]float64
		sd       float64
		declared bool
		best     int
	}{
		// 0.5 dB better than the rest with own-noise sd 0.1 dB: the paired
		// difference has sd 0.14 dB, so 3 replications separate it (t_2 ≈ 4.3,
		// half-width 0.35 dB < 0.5 dB).
		{"clear winner", [][]float64{{2, 1.5, 2, 2.5}}, 0.1, true, 1},
		// Identical candidates: every paired difference is exactly zero.
		{"identical", [][]float64{{1, 1, 1}}, 0, false, 0},
		// Two conditions; candidate 2 best in both.
		{"two conditions", [][]float64{{2, 2, 1}, {3, 3.5, 2.5}}, 0.05, true, 2},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			for seed := uint64(1); seed <= 5; seed++ {
				e := synthetic(tc.mu, tc.sd, seed)
				out, err := e.search(context.Background())
				if err != nil {
					t.Fatal(err)
				}
				last := out[len(out)-1]
				if last.declared != tc.declared {
					t.Errorf("seed %d: declared = %v, want %v (evidence %+v, ties %v)", seed, last.declared, tc.declared, last.evidence, last.tieSet)
				}
				if last.chosen != tc.best {
					t.Errorf("seed %d: chosen %d, want %d", seed, last.chosen, tc.best)
				}
				if !tc.declared && len(last.tieSet) != len(tc.mu[0]) {
					t.Errorf("seed %d: tie set %v, want all", seed, last.tieSet)
				}
			}
		})
	}
}

// With common random numbers and one clearly worse candidate, the worse one
// must be dropped after the first round and get fewer replications.
func TestEngineDropsEarly(t *testing.T) {
	// Candidates 0 and 1 differ by 0.02 dB (inside no indifference zone of
	// 0.005 dB at own-noise 0.05 dB, so they need many replications);
	// candidate 2 is 3 dB worse and is dropped at once.
	e := synthetic([][]float64{{1, 1.02, 4}}, 0.05, 7)
	e.obj.IndifferenceZone = 0.005
	e.maxReps = 30
	out, err := e.search(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if got := len(e.samples[2][0]); got != e.minReps {
		t.Errorf("worse candidate got %d replications, want %d", got, e.minReps)
	}
	if out[0].status[2] != StatusDropped {
		t.Errorf("status of worse candidate = %v", out[0].status[2])
	}
	if e.effort.Replications >= e.effort.EqualAllocationReplications {
		t.Errorf("sequential %d replications, equal allocation %d", e.effort.Replications, e.effort.EqualAllocationReplications)
	}
}

func TestEngineBudget(t *testing.T) {
	e := synthetic([][]float64{{1, 1.01}}, 0.3, 3)
	e.maxUserSlots = 5 * 100
	_, err := e.search(context.Background())
	var be *BudgetError
	if !errors.As(err, &be) {
		t.Fatalf("err = %v, want *BudgetError", err)
	}
	e = synthetic([][]float64{{1, 1.01}}, 0.3, 3)
	e.maxUserSlots = 20 * 100
	if _, err := e.search(context.Background()); err != nil {
		t.Fatal(err)
	}
	if e.effort.UserSlots > e.maxUserSlots || !e.effort.BudgetExhausted {
		t.Errorf("effort %+v over budget %d", e.effort, e.maxUserSlots)
	}
}

func TestEngineCancel(t *testing.T) {
	e := synthetic([][]float64{{1, 1.01, 1.02}}, 0.3, 3)
	ctx, cancel := context.WithCancel(context.Background())
	var calls atomic.Int64
	inner := e.run
	e.run = func(ctx2 context.Context, k, c, r int) (Sample, error) {
		if calls.Add(1) == 4 {
			cancel()
		}
		return inner(ctx2, k, c, r)
	}
	_, err := e.search(ctx)
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("err = %v, want context.Canceled", err)
	}
	if n := calls.Load(); n > 4+int64(e.parallel) {
		t.Errorf("%d runs after cancellation at run 4", n)
	}
}

// The outcome must not depend on the number of workers.
func TestEngineParallelismInvariant(t *testing.T) {
	var ref []scopeOutcome
	for _, p := range []int{1, 2, 5} {
		e := synthetic([][]float64{{2, 1.9, 2.1, 1.95}, {1, 1.2, 0.9, 1.1}}, 0.2, 11)
		e.parallel = p
		out, err := e.search(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		if ref == nil {
			ref = out
			continue
		}
		if !reflect.DeepEqual(ref, out) {
			t.Errorf("parallel %d: outcome differs", p)
		}
	}
}

// Constrained objective: the lowest-power candidate misses the outage limit
// and must not be chosen; the feasible one with the lowest power wins.
func TestEngineConstrained(t *testing.T) {
	pw := []float64{10, 12, 14}
	out := []float64{0.08, 0.01, 0.005}
	e := &engine{
		nK: 3, nC: 1, w: []float64{1},
		obj:     Objective{Kind: ObjectiveMinTxPower, OutageLimit: 0.02},
		conf:    0.95,
		minReps: 3, maxReps: 20, batch: 2,
		jobCost: func(k, c int) int64 { return 1 },
		tieLess: func(a, b int) bool { return a < b },
		run: func(ctx context.Context, k, c, r int) (Sample, error) {
			z := fading.NewStream(5, k, r, 1).NormFloat64()
			return Sample{TxPowerMeanDBm: pw[k] + 0.1*z, OutageProbability: math.Max(0, out[k]+0.001*z), UserSlots: 1}, nil
		},
	}
	res, err := e.search(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if res[0].chosen != 1 || !res[0].declared || res[0].fallback {
		t.Errorf("chosen %d declared %v fallback %v, want 1 true false", res[0].chosen, res[0].declared, res[0].fallback)
	}
	if res[0].feasible[0] {
		t.Error("candidate 0 (outage 8 %) marked feasible at a 2 % limit")
	}
}

func TestStatsAgainstGonum(t *testing.T) {
	// t_{0.975, 4} = 2.7764 (Student t table; gonum distuv.StudentsT).
	if q := tQuantile(0.975, 4); math.Abs(q-2.7764) > 1e-4 {
		t.Errorf("t quantile %v", q)
	}
	// mean of 1..5 = 3, s = sqrt(2.5): interval 3 ± 2.7764·1.5811/√5.
	e := meanCI([]float64{1, 2, 3, 4, 5}, 0.95)
	h := 2.7764 * math.Sqrt(2.5) / math.Sqrt(5)
	if math.Abs(e.Mean-3) > 1e-12 || math.Abs(e.High-3-h) > 1e-3 || e.N != 5 {
		t.Errorf("meanCI = %+v, want 3 ± %v", e, h)
	}
}
