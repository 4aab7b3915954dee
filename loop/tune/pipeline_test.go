package tune

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
)

// toyEval is a stand-in engine for the pipeline tests: a one-bit loop's SIR
// error std modelled as sqrt(Δ²/4 + (k·f_D·T/Δ)²), capped at the
// fixed-power spread, plus a replication term shared by every candidate
// (common random numbers through run.seed) and a small candidate term.
// Outage is 1 % per dB of that spread, mean Tx power 10 dBm plus it, and
// the noise rise 2 dB plus the step (so that a noise-rise limit can rule
// out the large steps).
func toyEval(ctx context.Context, sc *loop.Scenario) (Sample, error) {
	if err := ctx.Err(); err != nil {
		return Sample{}, err
	}
	fdT := DopplerProductMax(*sc)
	step := sc.InnerLoop.StepDB
	common := fading.NewStream(sc.Run.Seed, 0, 0, 1).NormFloat64()
	own := fading.NewStream(sc.Run.Seed, int(step*1000), int(sc.InnerLoop.UpdateRateHz), 2).NormFloat64()
	std := 5.57
	if sc.InnerLoop.Mode != loop.InnerModeFixedPower {
		track := 60 * fdT / step
		std = math.Min(5.57+step/4, math.Sqrt(step*step/4+track*track))
	}
	std += sc.Receiver.SIREstimationErrorDB
	std += 0.1*common + 0.02*own
	return Sample{
		SIRErrorStdDB:     std,
		OutageProbability: math.Min(1, 0.01*std),
		TxPowerMeanDBm:    10 + std,
		NoiseRiseDB:       2 + step,
		UserSlots:         int64(sc.Users()) * sc.TotalSlots(),
	}, nil
}

// tuneWith is Tune with eval in place of the engine.
func tuneWith(ctx context.Context, req Request, opt Options, eval evaluator) (*Recommendation, error) {
	opt.eval = eval
	return Tune(ctx, req, opt)
}

// capacityWith is Capacity with eval in place of the engine.
func capacityWith(ctx context.Context, req CapacityRequest, opt Options, eval evaluator) (*CapacityResult, error) {
	opt.eval = eval
	return Capacity(ctx, req, opt)
}

func toyRequest() Request {
	base := loop.CanonicalScenario()
	base.Groups[0].Count = 1
	base.Run.Slots = 3000
	base.Run.WarmupSlots = 0
	return Request{
		Base:      base,
		Axes:      []Axis{{Path: "inner_loop.step_db", Values: []float64{0.25, 0.5, 1, 2, 3}}},
		Objective: Objective{Kind: ObjectiveMinSIRErrorStd},
		Conditions: []Condition{
			{Name: "3 km/h", Weight: 1, Overrides: []Override{{Path: "groups[0].speeds[0].speed_kmh", Value: 3}}},
			{Name: "30 km/h", Weight: 1, Overrides: []Override{{Path: "groups[0].speeds[0].speed_kmh", Value: 30}}},
			{Name: "250 km/h", Weight: 1, Overrides: []Override{{Path: "groups[0].speeds[0].speed_kmh", Value: 250}}},
		},
	}
}

func TestTunePipelineToy(t *testing.T) {
	rec, err := tuneWith(context.Background(), toyRequest(), Options{}, toyEval)
	if err != nil {
		t.Fatal(err)
	}
	if len(rec.Conditions) != 3 || len(rec.Candidates) != 5 {
		t.Fatalf("shape %d × %d", len(rec.Conditions), len(rec.Candidates))
	}
	stepOf := func(c int) float64 {
		v, _ := rec.Candidates[rec.Conditions[c].Decision.Best].Value("inner_loop.step_db")
		return v
	}
	// The toy model's optimum is Δ* = sqrt(2·60·f_D·T): 0.67 dB at 3 km/h
	// (f_D·T = 0.0037), 2.1 dB at 30 km/h.
	if stepOf(0) > stepOf(1) {
		t.Errorf("best step %g at 3 km/h > %g at 30 km/h", stepOf(0), stepOf(1))
	}
	fast := rec.Conditions[2]
	if !fast.Baseline.BarelyHelps && fast.Decision.Declared {
		t.Errorf("250 km/h: declared winner and power control helps: %+v", fast.Baseline)
	}
	for c, cr := range rec.Conditions {
		if cr.Decision.Reason == "" || cr.Baseline == nil {
			t.Errorf("condition %d: missing reason or baseline", c)
		}
		t.Logf("%s: %s", cr.Name, cr.Decision.Reason)
	}
	t.Logf("overall: %s", rec.Overall.Reason)
	if rec.Effort.Replications > rec.Effort.EqualAllocationReplications {
		t.Errorf("effort %+v", rec.Effort)
	}
	if _, err := json.Marshal(rec); err != nil {
		t.Errorf("recommendation does not marshal: %v", err)
	}
}

func TestTuneRejectsBadRequests(t *testing.T) {
	req := toyRequest()
	req.Confidence = 2
	req.Budget.MinReplications = 1
	req.Objective = Objective{Kind: ObjectiveMinTxPower}
	req.Conditions[1].Weight = -1
	_, err := tuneWith(context.Background(), req, Options{}, toyEval)
	var v loop.Violations
	if !errors.As(err, &v) {
		t.Fatalf("err %v", err)
	}
	for _, f := range []string{"confidence", "budget.min_replications", "objective.outage_limit", "conditions[1].weight"} {
		if !strings.Contains(v.Error(), f+":") {
			t.Errorf("no violation for %s in %v", f, v)
		}
	}
	// An override of an unknown field is reported with its place.
	req = toyRequest()
	req.Conditions[2].Overrides = append(req.Conditions[2].Overrides, Override{Path: "groups[0].no_such", Value: 1})
	_, err = tuneWith(context.Background(), req, Options{}, toyEval)
	if !errors.As(err, &v) || v[0].Field != "conditions[2].overrides[1].path" {
		t.Errorf("err %v, want conditions[2].overrides[1].path", err)
	}
	// A candidate that breaks the scenario rules is reported with the
	// scenario field path.
	req = toyRequest()
	req.Axes[0].Values = []float64{1, 50}
	_, err = tuneWith(context.Background(), req, Options{}, toyEval)
	if !errors.As(err, &v) || !strings.Contains(v.Error(), "inner_loop.step_db") {
		t.Errorf("err %v, want a violation of inner_loop.step_db", err)
	}
}

// No axes: one candidate, the base setting; nothing to compare, no winner
// declared: the verdict is VerdictSingle and the reason says so.
func TestTuneSingleCandidate(t *testing.T) {
	req := toyRequest()
	req.Axes = nil
	rec, err := tuneWith(context.Background(), req, Options{}, toyEval)
	if err != nil {
		t.Fatal(err)
	}
	d := rec.Overall
	if len(rec.Candidates) != 1 || d.Best != 0 || d.Declared || d.RunnerUp != -1 || d.Verdict != VerdictSingle ||
		!strings.HasPrefix(d.Reason, "Single setting") || strings.Contains(strings.ToLower(d.Reason), "winner") {
		t.Errorf("decision %+v", d)
	}
	if rec.Effort.Stages != 1 || rec.Effort.Replications != 3*DefaultMinReplications {
		t.Errorf("effort %+v", rec.Effort)
	}
}

// TuneCost bounds the runs and the work of the search it plans: 5
// candidates × 3 conditions + 3 baselines, 32 replications each, of 1
// user × 3000 slots; with a budget the simulated part is at most the
// budget times the taps of a user.
func TestTuneCostBoundsTheSearch(t *testing.T) {
	req := toyRequest()
	c, err := TuneCost(req)
	if want := int64((5*3 + 3) * DefaultMaxReplications); err != nil || c.Runs != want || c.Points != 5 {
		t.Fatalf("cost %+v (%v), want %d runs of 5 candidates", c, err, want)
	}
	rec, err := tuneWith(context.Background(), req, Options{}, toyEval)
	if err != nil {
		t.Fatal(err)
	}
	if runs := int64(rec.Effort.Replications + rec.Effort.BaselineReplications); runs > c.Runs || rec.Effort.UserSlots > c.TapSlots {
		t.Errorf("spent %d runs and %d user-slots, cost bound %+v", runs, rec.Effort.UserSlots, c)
	}
	req.Budget.MaxUserSlots = 1000
	if b, _ := TuneCost(req); b.TapSlots != 1000*tapsPerUser(req.Base)+c.Runs*RunOverheadTapSlots {
		t.Errorf("bounded cost %+v, want 1000 user-slots × %d taps plus the run overhead", b, tapsPerUser(req.Base))
	}
}

// A budget of exactly the first round (5 candidates × 3 conditions × 2
// replications × 3000 user-slots) is never exceeded: no further rounds, no
// baseline.
func TestTuneBudgetRespected(t *testing.T) {
	req := toyRequest()
	req.Budget.MaxUserSlots = 5 * 3 * DefaultMinReplications * 3000
	rec, err := tuneWith(context.Background(), req, Options{}, toyEval)
	if err != nil {
		t.Fatal(err)
	}
	if rec.Effort.UserSlots > req.Budget.MaxUserSlots || rec.Effort.Stages != 1 || rec.Effort.BaselineReplications != 0 {
		t.Errorf("effort %+v over budget %d", rec.Effort, req.Budget.MaxUserSlots)
	}
	for _, c := range rec.Conditions {
		if c.Baseline != nil {
			t.Errorf("%s: baseline run without budget", c.Name)
		}
	}
	req.Budget.MaxUserSlots--
	var be *BudgetError
	if _, err := tuneWith(context.Background(), req, Options{}, toyEval); !errors.As(err, &be) || be.Field != "budget.max_user_slots" {
		t.Errorf("err %v, want *BudgetError on budget.max_user_slots", err)
	}
}

// A request round-trips through JSON with enum names, as a request file.
func TestRequestJSON(t *testing.T) {
	req := toyRequest()
	req.Objective = Objective{Kind: ObjectiveMinTxPower, OutageLimit: 0.02}
	b, err := json.Marshal(req)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(b), `"kind":"OBJECTIVE_KIND_MIN_TX_POWER"`) {
		t.Errorf("objective kind not written by name: %s", b)
	}
	var back Request
	if err := json.Unmarshal(b, &back); err != nil {
		t.Fatal(err)
	}
	b2, _ := json.Marshal(back)
	if string(b) != string(b2) {
		t.Errorf("round trip differs:\n%s\n%s", b, b2)
	}
	if err := json.Unmarshal([]byte(`{"objective":{"kind":"NOPE"}}`), &back); err == nil {
		t.Error("unknown objective kind accepted")
	}
}
