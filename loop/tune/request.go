package tune

import (
	"context"
	"fmt"
	"math"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
)

// This file holds a tuning request: its settings, defaults and limits,
// their checks, the plan (PlanTune) and the candidate scenarios.

// Defaults and limits of a tuning request.
const (
	// DefaultConfidence is the confidence level of intervals and tests.
	DefaultConfidence = 0.95
	// DefaultMinReplications is the first round per candidate and
	// condition: the fewest that give a paired t interval (1 degree of
	// freedom); common random numbers keep paired spreads small enough for
	// clear differences to show at once.
	DefaultMinReplications = 2
	// DefaultMaxReplications caps the replications of one candidate under
	// one condition.
	DefaultMaxReplications = 32
	// DefaultBatchReplications is added per round to candidates in
	// contention.
	DefaultBatchReplications = 2
	// MaxConditions is the most conditions of one request.
	MaxConditions = 64
	// MaxCandidateRuns bounds candidates × conditions × max_replications.
	MaxCandidateRuns = 1000000
	// BarelyHelpsFraction: power control "barely helps" in a condition when
	// the chosen setting improves the judged figure over fixed power by less
	// than this fraction of the fixed-power value, or not significantly.
	BarelyHelpsFraction = 0.1
)

// Budget bounds the effort of a search.
type Budget struct {
	// MinReplications every candidate gets under every condition before any
	// comparison, [2, MaxReplications]; 0 means DefaultMinReplications.
	MinReplications int `json:"min_replications"`
	// MaxReplications any candidate may get under any condition,
	// [MinReplications, loop.MaxReplications]; 0 means DefaultMaxReplications.
	MaxReplications int `json:"max_replications"`
	// BatchReplications added per round to each candidate still in
	// contention, [1, 100]; 0 means DefaultBatchReplications.
	BatchReplications int `json:"batch_replications"`
	// MaxUserSlots bounds the simulated users × slots of all runs; 0 means
	// no bound beyond MaxReplications. The fixed-power baseline runs on
	// what the candidates left: on the recommended candidate's replications,
	// on MinReplications, or not at all.
	MaxUserSlots int64 `json:"max_user_slots"`
}

// Request is one tuning question: which point of the grid of Axes is best
// for Objective over the weighted Conditions, at Confidence.
type Request struct {
	// Base is the scenario every candidate starts from; its run.seed seeds
	// every replication (ReplicationSeed) and its run.replications is
	// ignored (the budget decides).
	Base loop.Scenario `json:"base"`
	// Axes span the candidate settings (grid order, see Point).
	Axes []Axis `json:"axes"`
	// Conditions to be robust over; empty means one condition, the base
	// scenario as it is, weight 1.
	Conditions []Condition `json:"conditions"`
	// Objective is what is minimised.
	Objective Objective `json:"objective"`
	// Confidence of every interval and of the winner's paired test,
	// [0.5, 0.9999]; 0 means DefaultConfidence.
	Confidence float64 `json:"confidence"`
	// Budget bounds the effort.
	Budget Budget `json:"budget"`
	// SkipBaseline leaves out the fixed-power baseline runs. A multi-cell
	// base (layout.sites set) never has one: the multi-cell engine runs the
	// closed loop or the ideal bound only.
	SkipBaseline bool `json:"skip_baseline"`
}

// Options are the call-time settings of Tune and Capacity that do not change
// the result.
type Options struct {
	// Progress, when set, is called after every finished run (serialised,
	// from worker goroutines; it must not block for long) and once more
	// when the answer is ready (FractionDone 1).
	Progress func(SearchProgress)
	// Parallelism is the most runs in flight; 0 means GOMAXPROCS. The result
	// does not depend on it.
	Parallelism int
	// RunReplication, when set, runs one replication (one fully built,
	// seeded scenario) in place of the in-process engine
	// (multicell.RunScenario), e.g. on a work queue's workers. It must
	// return the report the engine would return for sc, so that the result
	// does not depend on where replications run. Nil runs in process.
	RunReplication func(ctx context.Context, sc loop.Scenario) (*loop.Report, error)

	// eval, when set, replaces the engine and RunReplication (tests).
	eval evaluator
}

// evaluatorFor returns the evaluator of opt: opt.RunReplication when set,
// else the in-process engine.
func evaluatorFor(opt Options) evaluator {
	if opt.eval != nil {
		return opt.eval
	}
	if opt.RunReplication == nil {
		return runScenario
	}
	run := opt.RunReplication
	return func(ctx context.Context, sc *loop.Scenario) (Sample, error) {
		rep, err := run(ctx, *sc)
		if err != nil {
			return Sample{}, err
		}
		return sampleOf(sc, rep)
	}
}

// evaluator runs one replication of sc (run.replications = 1, run.seed
// set, normalised and valid) and returns its figures.
type evaluator func(ctx context.Context, sc *loop.Scenario) (Sample, error)

type settings struct {
	conf                        float64
	minReps, maxReps, batchReps int
	maxUserSlots                int64
	weights                     []float64
	conds                       []Condition
}

func (req *Request) check(nK int) (settings, loop.Violations) {
	var v loop.Violations
	add := func(f, format string, args ...any) {
		v = append(v, loop.Violation{Field: f, Rule: fmt.Sprintf(format, args...)})
	}
	s := settings{conf: req.Confidence}
	if s.conf == 0 {
		s.conf = DefaultConfidence
	}
	if !(s.conf >= 0.5 && s.conf <= 0.9999) {
		add("confidence", "must be in [0.5, 0.9999], got %g", req.Confidence)
	}
	req.Objective.validate(func(p, r string) { add(p, "%s", r) })
	b := req.Budget
	s.minReps, s.maxReps, s.batchReps = b.MinReplications, b.MaxReplications, b.BatchReplications
	if s.minReps == 0 {
		s.minReps = DefaultMinReplications
	}
	if s.maxReps == 0 {
		s.maxReps = max(DefaultMaxReplications, s.minReps)
	}
	if s.batchReps == 0 {
		s.batchReps = DefaultBatchReplications
	}
	if s.minReps < 2 || s.minReps > loop.MaxReplications {
		add("budget.min_replications", "must be in [2, %d] (a paired interval needs 2), got %d", loop.MaxReplications, b.MinReplications)
	}
	if s.maxReps < s.minReps || s.maxReps > loop.MaxReplications {
		add("budget.max_replications", "must be in [min_replications, %d], got %d", loop.MaxReplications, b.MaxReplications)
	}
	if s.batchReps < 1 || s.batchReps > 100 {
		add("budget.batch_replications", "must be in [1, 100], got %d", b.BatchReplications)
	}
	if b.MaxUserSlots < 0 {
		add("budget.max_user_slots", "must be >= 0 (0: no bound), got %d", b.MaxUserSlots)
	}
	s.maxUserSlots = b.MaxUserSlots
	s.conds = req.Conditions
	if len(s.conds) == 0 {
		s.conds = []Condition{{Name: "base", Weight: 1}}
	}
	if len(s.conds) > MaxConditions {
		add("conditions", "at most %d conditions, got %d", MaxConditions, len(s.conds))
		return s, v
	}
	var wsum float64
	for i, c := range s.conds {
		if !(c.Weight > 0 && c.Weight <= 1e6) {
			add(fmt.Sprintf("conditions[%d].weight", i), "must be in (0, 1e6], got %g", c.Weight)
		}
		wsum += c.Weight
		for j, o := range c.Overrides {
			if o.Path == "" {
				add(fmt.Sprintf("conditions[%d].overrides[%d].path", i, j), "must name a scenario field")
			} else if math.IsNaN(o.Value) || math.IsInf(o.Value, 0) {
				add(fmt.Sprintf("conditions[%d].overrides[%d].value", i, j), "must be finite, got %g", o.Value)
			}
		}
	}
	if len(v) == 0 {
		s.weights = make([]float64, len(s.conds))
		for i, c := range s.conds {
			s.weights[i] = c.Weight / wsum
		}
	}
	if len(v) == 0 && float64(nK)*float64(len(s.conds))*float64(s.maxReps) > MaxCandidateRuns {
		add("budget.max_replications", "candidates × conditions × max_replications = %d × %d × %d exceeds %d",
			nK, len(s.conds), s.maxReps, MaxCandidateRuns)
	}
	return s, v
}

// buildScenarios returns the normalised, validated scenario of every
// candidate k under every condition c ([k][c]), with run.replications 1.
func buildScenarios(base loop.Scenario, pts []Point, conds []Condition) ([][]loop.Scenario, loop.Violations) {
	var v loop.Violations
	out := make([][]loop.Scenario, len(pts))
	for c, cd := range conds {
		sc := base.Clone()
		for j, o := range cd.Overrides {
			if err := o.Apply(&sc); err != nil {
				v = append(v, loop.Violation{Field: fmt.Sprintf("conditions[%d].overrides[%d].path", c, j), Rule: err.Error()})
			}
		}
	}
	if len(v) > 0 {
		return nil, v
	}
	seen := map[string]bool{}
	for k, p := range pts {
		out[k] = make([]loop.Scenario, len(conds))
		for c, cd := range conds {
			sc := base.Clone()
			_ = cd.Apply(&sc) // checked above
			if err := p.Apply(&sc); err != nil {
				v = append(v, loop.Violation{Field: "axes", Rule: err.Error()})
				return nil, v
			}
			sc.Run.Replications = 1
			sc.Normalise()
			for _, x := range multicell.Validate(sc) {
				key := x.Field + "\x00" + x.Rule
				if seen[key] {
					continue
				}
				seen[key] = true
				x.Rule = fmt.Sprintf("%s (candidate %s, condition %q)", x.Rule, p.Label(), cd.Name)
				v = append(v, x)
			}
			out[k][c] = sc
		}
	}
	if len(v) > 0 {
		return nil, v
	}
	return out, nil
}

// TunePlan is a checked tuning request: its grid, resolved settings and
// the bound on its work, found without building a candidate scenario
// beyond one probe per axis value and one per condition. Run answers it.
type TunePlan struct {
	req  Request // SkipBaseline resolved
	grid *Grid
	set  settings
	cost Cost
}

// Cost is the bound on the plan's work (see PlanTune).
func (p *TunePlan) Cost() Cost { return p.cost }

// TuneCost is PlanTune(req).Cost().
func TuneCost(req Request) (Cost, error) {
	p, err := PlanTune(req)
	if err != nil {
		return Cost{}, err
	}
	return p.cost, nil
}

// PlanTune validates req's grid, conditions, objective and budget and
// bounds the work of Tune(req) without building a candidate scenario
// beyond one probe per axis value and one per condition: with K
// candidates, C conditions and R = max_replications,
//
//	runs      = (K + B)·C·R   (B = 1 with the fixed-power baseline, else 0)
//	tap-slots = Σ_c (K + B)·R·cost₁(heaviest candidate under c)
//	            + runs·RunOverheadTapSlots,
//
// where cost₁ is loop.Scenario.Cost of one replication; the simulated part
// is capped at budget.max_user_slots × the most taps per user when that is
// set. A service compares TapSlots with its bound before it runs the plan
// (TunePlan.Run builds the candidates).
func PlanTune(req Request) (*TunePlan, error) {
	req.SkipBaseline = req.SkipBaseline || req.Base.MultiCell()
	grid, err := NewGrid(req.Base, req.Axes)
	if err != nil {
		return nil, err
	}
	set, v := req.check(grid.Size())
	if len(v) > 0 {
		return nil, v
	}
	base := req.Base.Clone()
	// An axis value that makes the base invalid is the request's problem
	// before any work, reported at axes[a].values[k] as PlanSweep does.
	heavy, pv := probeAxes(base, grid, true)
	if len(pv) > 0 {
		return nil, capViolations(pv)
	}
	k := int64(grid.Size())
	b := int64(0)
	if !req.SkipBaseline {
		b = 1
	}
	reps := int64(set.maxReps)
	var sim float64
	maxTaps := int64(1)
	for c, cd := range set.conds {
		// The condition first, then the candidate's axis values (as Tune
		// builds its scenarios).
		sc := base.Clone()
		for j, o := range cd.Overrides {
			if err := o.Apply(&sc); err != nil {
				v = append(v, loop.Violation{Field: fmt.Sprintf("conditions[%d].overrides[%d].path", c, j), Rule: err.Error()})
			}
		}
		_ = heavy.Apply(&sc) // an axis value that does not apply fails at build time, after admission
		sc.Run.Replications = 1
		sc.Normalise()
		one := sc.Cost()
		sim += float64(k+b) * float64(reps) * float64(one)
		maxTaps = max(maxTaps, tapsPerUser(sc))
	}
	if len(v) > 0 {
		return nil, v
	}
	if set.maxUserSlots > 0 {
		sim = math.Min(sim, float64(set.maxUserSlots)*float64(maxTaps))
	}
	runs := satMul(satMul(k+b, int64(len(set.conds))), reps)
	cost := Cost{Points: k, Runs: runs, TapSlots: satAdd(sat(sim), satMul(runs, RunOverheadTapSlots))}
	return &TunePlan{req: req, grid: grid, set: set, cost: cost}, nil
}
