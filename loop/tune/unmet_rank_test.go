package tune

import (
	"context"
	"testing"
)

// TestUnmetRanksClosestFirst: when no candidate meets the constraints the
// candidates are ranked by their worst relative constraint excess
// (Objective.Excess) on the single-cell and the multi-cell engine alike:
// the recommendation (rank 1) has the smallest mean excess of all, and
// every other candidate's paired difference to it is ≥ 0 (worse or equal).
// The cases are chosen so that the excesses are close and, with two
// replications (t_1 = 12.7), their intervals overlap — where TieRule
// (smaller window_db, smaller step first, preferred for their loop
// behaviour, not for being nearer the limits) used to put a farther
// candidate first: before the fix the layout case recommended
// window_db=4 at excess 10.08 over window_db=6 at 8.84, the single-cell
// case step_db=1 at 287.6 over 1.25 dB at 284.1, each with negative
// differences to it (the README town layout showed the same, window_db=2
// at 149.5 % of limit over window_db=6 at 132.1 %).
// Layout: 7 omni cells × 4 users at 30 km/h, 8 dB shadowing, outage limit
// 1 % (misses by several times, outage some 10 %); single cell: 4 users at
// 120 km/h on flat Rayleigh, outage limit 0.1 % (misses by ~2.9×10²).
func TestUnmetRanksClosestFirst(t *testing.T) {
	layout := func() Request {
		base := multiBase()
		base.Run.Slots, base.Run.WarmupSlots = 600, 150
		return Request{
			Base:      base,
			Axes:      []Axis{{Path: "layout.handover.window_db", Values: []float64{4, 5, 6}}},
			Objective: Objective{Kind: ObjectiveMinTxPower, OutageLimit: 0.01},
			Budget:    Budget{MinReplications: 2, MaxReplications: 2, BatchReplications: 1},
		}
	}
	single := func() Request {
		base := flatSingle(1500)
		base.Groups[0].Count = 4
		base.Groups[0].DistancesM = []float64{100, 200, 400, 800}
		base.Groups[0].Speeds[0].SpeedKmh = 120
		return Request{
			Base:      base,
			Axes:      []Axis{{Path: "inner_loop.step_db", Values: []float64{1, 1.25, 1.5}}},
			Objective: Objective{Kind: ObjectiveMinTxPower, OutageLimit: 0.001},
			Budget:    Budget{MinReplications: 2, MaxReplications: 2, BatchReplications: 1},
		}
	}
	for _, tc := range []struct {
		name string
		req  func() Request
	}{
		{"layout, handover window", layout},
		{"single cell, inner-loop step", single},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rec, err := Tune(context.Background(), tc.req(), Options{})
			if err != nil {
				t.Fatal(err)
			}
			checkRecommendation(t, tc.name, rec)
			check := func(scope string, d Decision, cands []CandidateResult) {
				if d.Verdict != VerdictConstraintsUnmet {
					t.Fatalf("%s: verdict %v, the case needs constraints unmet: %s", scope, d.Verdict, d.Reason)
				}
				first := cands[d.Ordering[0]]
				for i, k := range d.Ordering {
					c := cands[k]
					t.Logf("%s rank %d: %s excess %.4f [%.4f, %.4f], diff %.4f [%.4f, %.4f]", scope, i+1,
						rec.Candidates[k].Label(), c.Objective.Mean, c.Objective.Low, c.Objective.High,
						c.DiffToBest.Mean, c.DiffToBest.Low, c.DiffToBest.High)
					if i == 0 {
						continue
					}
					if c.Objective.Mean < first.Objective.Mean {
						t.Errorf("%s: rank %d (%s) excess %.4f below rank 1's %.4f", scope, i+1, rec.Candidates[k].Label(), c.Objective.Mean, first.Objective.Mean)
					}
					if c.DiffToBest.Mean < 0 {
						t.Errorf("%s: rank %d (%s) diff to best %.4f < 0", scope, i+1, rec.Candidates[k].Label(), c.DiffToBest.Mean)
					}
				}
			}
			for _, cr := range rec.Conditions {
				check(cr.Name, cr.Decision, cr.Candidates)
			}
			check("overall", rec.Overall, rec.OverallCandidates)
		})
	}
}
