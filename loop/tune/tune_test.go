package tune

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"runtime"
	"strings"
	"sync/atomic"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
)

// flatSingle is one user at 300 m on a flat Rayleigh channel, no other-cell
// interference, no feedback delay, 1500 Hz, 1 dB steps, a fixed 5 dB target;
// slots per replication, 300 of them warm-up.
func flatSingle(slots int64) loop.Scenario {
	sc := loop.CanonicalScenario()
	g := &sc.Groups[0]
	g.Name = "one"
	g.Count = 1
	g.Placement = loop.PlacementExplicit
	g.DistancesM = []float64{300}
	g.MinDistanceM, g.MaxDistanceM = 0, 0
	g.CustomTaps = nil
	g.Profile = "FLAT"
	sc.Receiver.OtherCellRatio = 0
	sc.InnerLoop.FeedbackDelaySlots = 0
	sc.Run.Slots = slots
	sc.Run.WarmupSlots = 300
	return sc
}

func speedCond(name string, kmh float64) Condition {
	return Condition{Name: name, Weight: 1, Overrides: []Override{{Path: "groups[0].speeds[0].speed_kmh", Value: kmh}}}
}

func stepOf(rec *Recommendation, d Decision) float64 {
	v, _ := rec.Candidates[d.Best].Value("inner_loop.step_db")
	return v
}

// The one-bit loop's best step grows with f_D·T while it can track, and at
// f_D·T ≈ 0.3 it cannot track at all. Speeds 3, 30 and 250 km/h at 2 GHz and
// 1500 Hz give f_D·T = 0.0037, 0.037 and 0.31. The fixed-step loop without
// fading settles into a ±Δ/2 limit cycle (derived, ORACLES.md), so at low
// f_D·T large steps only add noise; at high f_D·T the fades outrun any
// step. Each replication is 4500 slots (3 s; 15 000 without -short): about
// 40 decorrelation times (0.4/f_D) at 3 km/h; the paired differences between steps are several
// tenths of a dB against a paired spread of a few hundredths (common random
// numbers), so a handful of replications decide.
func TestBestStepFollowsDoppler(t *testing.T) {
	seeds := []uint64{1, 2, 3, 4, 5}
	slots := int64(4500)
	switch {
	case testing.Short() && raceEnabled:
		seeds = seeds[:1] // the same claims per seed, on one seed
	case testing.Short():
		seeds = seeds[:2]
	default:
		slots = 15000
	}
	for _, seed := range seeds {
		base := flatSingle(slots)
		base.Run.Seed = seed
		req := Request{
			Base:       base,
			Axes:       []Axis{{Path: "inner_loop.step_db", Values: []float64{0.25, 0.5, 1, 2, 3}}},
			Objective:  Objective{Kind: ObjectiveMinSIRErrorStd},
			Conditions: []Condition{speedCond("low", 3), speedCond("mid", 30), speedCond("high", 250)},
		}
		rec, err := Tune(context.Background(), req, Options{})
		if err != nil {
			t.Fatal(err)
		}
		checkRecommendation(t, "doppler", rec)
		low, mid, high := rec.Conditions[0], rec.Conditions[1], rec.Conditions[2]
		if stepOf(rec, low.Decision) > stepOf(rec, mid.Decision) {
			t.Errorf("seed %d: best step %g dB at f_D·T %.3g above %g dB at %.3g", seed,
				stepOf(rec, low.Decision), low.DopplerProductMax, stepOf(rec, mid.Decision), mid.DopplerProductMax)
		}
		if high.Decision.Declared && !high.Baseline.BarelyHelps {
			t.Errorf("seed %d: at f_D·T %.3g a declared winner and a gain %+v over fixed power",
				seed, high.DopplerProductMax, high.Baseline.Gain)
		}
		if high.Baseline.BarelyHelps && !strings.Contains(high.Decision.Reason, "barely helps") {
			t.Errorf("seed %d: reason does not say so: %s", seed, high.Decision.Reason)
		}
		if low.Baseline.BarelyHelps || mid.Baseline.BarelyHelps {
			t.Errorf("seed %d: power control judged useless at low/mid f_D·T: %+v %+v", seed, low.Baseline, mid.Baseline)
		}
	}
}

// A planted winner: three candidates identical but for the SIR estimation
// error (0 dB for the planted one, 1.5 and 3 dB for the others); the loop
// reacting to estimation noise can only widen the true SIR spread, so the
// planted one must win, declared, for every seed. It is deliberately not
// first in grid order.
func TestPlantedWinner(t *testing.T) {
	seeds := []uint64{11, 12, 13, 14, 15, 16, 17, 18}
	if testing.Short() {
		seeds = seeds[:2]
	}
	for _, seed := range seeds {
		base := flatSingle(6000)
		base.Run.Seed = seed
		base.Groups[0].Speeds[0].SpeedKmh = 30
		req := Request{
			Base:      base,
			Axes:      []Axis{{Path: "receiver.sir_estimation_error_db", Values: []float64{1.5, 0, 3}}},
			Objective: Objective{Kind: ObjectiveMinSIRErrorStd},
		}
		rec, err := Tune(context.Background(), req, Options{})
		if err != nil {
			t.Fatal(err)
		}
		checkRecommendation(t, "planted", rec)
		if d := rec.Overall; d.Best != 1 || !d.Declared {
			t.Errorf("seed %d: best %d declared %v, want the planted candidate 1 declared: %s", seed, d.Best, d.Declared, d.Reason)
		}
	}
}

// Two identical candidates (an outer-loop step with the outer loop off
// changes nothing) give exactly equal figures replication by replication:
// always a tie, broken by the rule (smaller up step).
func TestIdenticalCandidatesTie(t *testing.T) {
	for _, seed := range []uint64{5, 6} {
		base := flatSingle(3000)
		base.Run.Seed = seed
		req := Request{
			Base:       base,
			Axes:       []Axis{{Path: "outer_loop.up_step_db", Values: []float64{1, 0.5}}},
			Objective:  Objective{Kind: ObjectiveMinOutage},
			Conditions: []Condition{speedCond("ped", 3), speedCond("veh", 60)},
		}
		rec, err := Tune(context.Background(), req, Options{})
		if err != nil {
			t.Fatal(err)
		}
		for _, d := range []Decision{rec.Conditions[0].Decision, rec.Conditions[1].Decision, rec.Overall} {
			if d.Declared || len(d.TieSet) != 2 || d.Best != 1 {
				t.Errorf("seed %d: declared %v ties %v best %d, want a tie broken to candidate 1", seed, d.Declared, d.TieSet, d.Best)
			}
			if !strings.Contains(d.Reason, "tie rule") {
				t.Errorf("seed %d: reason does not say it is a tie: %s", seed, d.Reason)
			}
		}
	}
}

func tuneRequestSmall() Request {
	base := flatSingle(3000)
	base.Groups[0].Count = 3
	base.Groups[0].DistancesM = []float64{100, 300, 600}
	base.Receiver.OtherCellRatio = 0.2
	base.InnerLoop.FeedbackDelaySlots = 1
	return Request{
		Base: base,
		Axes: []Axis{
			{Path: "inner_loop.step_db", Values: []float64{0.5, 1, 2}},
			{Path: "inner_loop.update_rate_hz", Values: []float64{750, 1500}},
		},
		Objective:  Objective{Kind: ObjectiveMinSIRErrorStd},
		Conditions: []Condition{speedCond("ped", 3), speedCond("veh", 60)},
		Budget:     Budget{MinReplications: 3, MaxReplications: 8},
	}
}

// Same request → the same recommendation, bit for bit, at GOMAXPROCS 1 and 2
// and any parallelism.
func TestTuneDeterministic(t *testing.T) {
	prev := runtime.GOMAXPROCS(0)
	defer runtime.GOMAXPROCS(prev)
	var ref []byte
	cfgs := []struct{ procs, par int }{{1, 0}, {2, 0}, {2, 3}}
	req := tuneRequestSmall()
	if testing.Short() {
		cfgs = cfgs[:2]
		req.Base.Run.Slots = 1500
	}
	for _, c := range cfgs {
		runtime.GOMAXPROCS(c.procs)
		rec, err := Tune(context.Background(), req, Options{Parallelism: c.par})
		if err != nil {
			t.Fatal(err)
		}
		b, err := json.Marshal(rec)
		if err != nil {
			t.Fatal(err)
		}
		if ref == nil {
			ref = b
		} else if !bytes.Equal(ref, b) {
			t.Errorf("GOMAXPROCS %d parallelism %d: recommendation differs", c.procs, c.par)
		}
	}
}

func TestTuneProgressAndCancel(t *testing.T) {
	var events, last atomic.Int64
	rec, err := Tune(context.Background(), tuneRequestSmall(), Options{Progress: func(p SearchProgress) {
		events.Add(1)
		last.Store(int64(p.ReplicationsDone))
		if p.CandidatesRemaining < 0 || p.CandidatesRemaining > 6 {
			t.Errorf("candidates remaining %d", p.CandidatesRemaining)
		}
	}})
	if err != nil {
		t.Fatal(err)
	}
	// One event per run, and the final one (fraction done 1).
	if want := int64(rec.Effort.Replications + rec.Effort.BaselineReplications); last.Load() != want || events.Load() != want+1 {
		t.Errorf("progress: %d events, last %d, want %d", events.Load(), last.Load(), want)
	}
	ctx, cancel := context.WithCancel(context.Background())
	var after atomic.Int64
	_, err = Tune(ctx, tuneRequestSmall(), Options{Progress: func(p SearchProgress) {
		if p.ReplicationsDone >= 3 {
			cancel()
			after.Add(1)
		}
	}})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("err %v, want context.Canceled", err)
	}
	// Runs already in flight may finish; no new ones start.
	if n := after.Load(); n > int64(runtime.GOMAXPROCS(0))+1 {
		t.Errorf("%d runs finished after cancellation", n)
	}
}

// Minimum Tx power subject to outage ≤ 15 % and achieved BLER within ±30 %
// of τ = 0.1: the recommended setting meets both on its estimates, and every
// candidate with a lower mean power misses one of them.
func TestMinTxPowerConstrained(t *testing.T) {
	base := flatSingle(6000)
	base.Groups[0].Count = 4
	base.Groups[0].DistancesM = []float64{100, 200, 400, 800}
	base.Groups[0].Speeds[0].SpeedKmh = 30
	base.OuterLoop.Enabled = true
	base.OuterLoop.BLERTarget = 0.1
	obj := Objective{Kind: ObjectiveMinTxPower, OutageLimit: 0.15, BLERTolerance: 0.3}
	req := Request{
		Base: base,
		Axes: []Axis{
			{Path: "inner_loop.step_db", Values: []float64{0.5, 1, 2}},
			{Path: "outer_loop.up_step_db", Values: []float64{0.25, 1}},
		},
		Objective: obj,
	}
	rec, err := Tune(context.Background(), req, Options{})
	if err != nil {
		t.Fatal(err)
	}
	checkRecommendation(t, "min power", rec)
	cr := rec.Conditions[0]
	if cr.Decision.ConstraintsUnmet {
		t.Fatalf("no feasible setting: %s", cr.Decision.Reason)
	}
	ok := func(f TuneFigures) bool {
		return f.OutageProbability.Mean <= obj.OutageLimit && f.BLER.Mean >= 0.07 && f.BLER.Mean <= 0.13
	}
	best := cr.Candidates[cr.Decision.Best]
	if !best.Feasible || !ok(best.Figures) {
		t.Errorf("recommended %s misses the constraints: %+v", rec.Candidates[best.Candidate].Label(), best.Figures)
	}
	for _, c := range cr.Candidates {
		if c.Figures.TxPowerMeanDBm.Mean < best.Figures.TxPowerMeanDBm.Mean && ok(c.Figures) && c.Status == StatusDropped {
			t.Errorf("feasible %s with lower power %.2f dBm was dropped", rec.Candidates[c.Candidate].Label(), c.Figures.TxPowerMeanDBm.Mean)
		}
	}
}

// checkDecision asserts what every decision must satisfy, whatever its
// verdict: the ordering is a permutation led by the recommendation, the
// runner-up is its second entry and its evidence is its difference to the
// recommendation, the verdict and its flags agree, every text starts with
// the verdict's own word and only a winner is ever called one.
func checkDecision(t *testing.T, scope string, d Decision, cands []CandidateResult, nK int) {
	t.Helper()
	if len(d.Ordering) != nK || d.Ordering[0] != d.Best {
		t.Errorf("%s: ordering %v, best %d", scope, d.Ordering, d.Best)
	}
	seen := map[int]bool{}
	for _, k := range d.Ordering {
		seen[k] = true
	}
	if len(seen) != nK {
		t.Errorf("%s: ordering %v is not a permutation of %d candidates", scope, d.Ordering, nK)
	}
	if nK > 1 && (d.RunnerUp != d.Ordering[1] || d.Evidence != cands[d.RunnerUp].DiffToBest) {
		t.Errorf("%s: runner-up %d evidence %+v, want ordering[1] = %d with its diff %+v", scope, d.RunnerUp, d.Evidence, d.Ordering[1], cands[d.Ordering[1]].DiffToBest)
	}
	if nK == 1 && d.RunnerUp != -1 {
		t.Errorf("%s: runner-up %d with one candidate", scope, d.RunnerUp)
	}
	if m := cands[d.Best].DiffToBest.Mean; m != 0 {
		t.Errorf("%s: the recommendation's difference to itself is %g", scope, m)
	}
	prefix := map[Verdict]string{VerdictWinner: "Winner", VerdictTie: fmt.Sprintf("Tie of %d", len(d.TieSet)),
		VerdictConstraintsUnmet: "Constraints unmet", VerdictSingle: "Single setting"}[d.Verdict]
	if prefix == "" || !strings.HasPrefix(d.Headline, prefix) || !strings.HasPrefix(d.Reason, d.Headline) {
		t.Errorf("%s: verdict %v, headline %q, reason %q", scope, d.Verdict, d.Headline, d.Reason)
	}
	if d.Declared != (d.Verdict == VerdictWinner) || d.ConstraintsUnmet != (d.Verdict == VerdictConstraintsUnmet) {
		t.Errorf("%s: verdict %v with declared %v, constraints unmet %v", scope, d.Verdict, d.Declared, d.ConstraintsUnmet)
	}
	if d.Verdict == VerdictTie && (len(d.TieSet) < 2 || d.TieBreak == "" || !strings.Contains(d.Headline, d.TieBreak)) {
		t.Errorf("%s: tie set %v, tie break %q, headline %q", scope, d.TieSet, d.TieBreak, d.Headline)
	}
	if d.Verdict != VerdictWinner {
		for _, s := range []string{d.Headline, d.RunnerUpLine, d.Reason} {
			if strings.Contains(strings.ToLower(s), "winner") {
				t.Errorf("%s: verdict %v but the text says winner: %q", scope, d.Verdict, s)
			}
		}
	}
	if d.Verdict == VerdictConstraintsUnmet {
		for k, c := range cands {
			if c.Feasible {
				t.Errorf("%s: constraints unmet, yet candidate %d meets them", scope, k)
			}
		}
		if len(d.Misses) == 0 {
			t.Errorf("%s: constraints unmet without misses", scope)
		}
		for _, m := range d.Misses {
			if !(m.Excess > 0) || m.Text == "" || !strings.Contains(d.Headline, m.Text) {
				t.Errorf("%s: miss %+v not positive or not in the headline %q", scope, m, d.Headline)
			}
		}
		// The closest candidate: no other has a smaller excess by point
		// estimate, and the tie rule never replaces it.
		if len(d.TieSet) != 1 || d.TieBreak != "" {
			t.Errorf("%s: constraints unmet with tie set %v, tie break %q", scope, d.TieSet, d.TieBreak)
		}
		for k, c := range cands {
			if c.Objective.Mean < cands[d.Best].Objective.Mean {
				t.Errorf("%s: candidate %d excess %g below the recommended %g", scope, k, c.Objective.Mean, cands[d.Best].Objective.Mean)
			}
		}
	}
	// Candidates that meet the constraints come first in the ordering.
	for i := 1; i < len(d.Ordering); i++ {
		if cands[d.Ordering[i]].Feasible && !cands[d.Ordering[i-1]].Feasible && !d.ConstraintsUnmet {
			t.Errorf("%s: ordering %v puts a feasible candidate after an infeasible one", scope, d.Ordering)
		}
	}
}

func checkRecommendation(t *testing.T, name string, rec *Recommendation) {
	t.Helper()
	nK := len(rec.Candidates)
	for _, cr := range rec.Conditions {
		checkDecision(t, name+"/"+cr.Name, cr.Decision, cr.Candidates, nK)
	}
	checkDecision(t, name+"/overall", rec.Overall, rec.OverallCandidates, nK)
	if ls := rec.Lines(); ls[0] != rec.Overall.Headline || ls[len(ls)-1] != loop.Caution {
		t.Errorf("%s: lines %q", name, ls)
	}
}
