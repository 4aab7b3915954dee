package tune

import (
	"context"
	"fmt"
	"math"
	"sort"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
)

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

// streamReplicationSeed is the stream kind of the per-replication seeds.
const streamReplicationSeed fading.StreamKind = 901

// ReplicationSeed is the seed of replication r under condition c of a
// search seeded with seed: the first Uint64 of fading.NewStream(seed, c, r,
// 901). Every candidate under condition c uses it for replication r (common
// random numbers), and so does the fixed-power baseline; the capacity search
// uses condition 0 for every user count.
func ReplicationSeed(seed uint64, c, r int) uint64 {
	return fading.NewStream(seed, c, r, streamReplicationSeed).Uint64()
}

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
	// from worker goroutines; it must not block for long).
	Progress func(Progress)
	// Parallelism is the most runs in flight; 0 means GOMAXPROCS. The result
	// does not depend on it.
	Parallelism int
	// RunReplication, when set, runs one replication (one fully built,
	// seeded scenario) in place of the in-process engine
	// (multicell.RunScenario), e.g. on a work queue's workers. It must
	// return the report the engine would return for sc, so that the result
	// does not depend on where replications run. Nil runs in process.
	RunReplication func(ctx context.Context, sc loop.Scenario) (*loop.Report, error)
}

// evaluatorFor returns the evaluator of opt: opt.RunReplication when set,
// else the in-process engine.
func evaluatorFor(opt Options) evaluator {
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

// Figures is every figure of one candidate under one condition, each with
// its interval over replications at the request's confidence.
type Figures struct {
	SIRErrorMeanDB    ReplicationEstimate `json:"sir_error_mean_db"`
	SIRErrorStdDB     ReplicationEstimate `json:"sir_error_std_db"`
	OutageProbability ReplicationEstimate `json:"outage_probability"`
	BLER              ReplicationEstimate `json:"achieved_bler"`
	// BLERTarget is the outer loop's τ (0 when the outer loop is off).
	BLERTarget     float64             `json:"bler_target"`
	TxPowerMeanDBm ReplicationEstimate `json:"tx_power_mean_dbm"`
	TimeAtMaxPower ReplicationEstimate `json:"max_power_fraction"`
	NoiseRiseDB    ReplicationEstimate `json:"noise_rise_mean_db"`
	// InfeasibleReplications counts replications the engine flagged as
	// infeasible load.
	InfeasibleReplications int `json:"infeasible_replications"`
}

// figures summarises samples at confidence conf.
func figures(xs []Sample, conf float64) Figures {
	col := func(f func(Sample) float64) []float64 {
		out := make([]float64, len(xs))
		for i, x := range xs {
			out[i] = f(x)
		}
		return out
	}
	fg := Figures{
		SIRErrorMeanDB:    meanCI(col(func(s Sample) float64 { return s.SIRErrorMeanDB }), conf),
		SIRErrorStdDB:     clampEstimate(meanCI(col(func(s Sample) float64 { return s.SIRErrorStdDB }), conf), 0, math.Inf(1)),
		OutageProbability: clampEstimate(meanCI(col(func(s Sample) float64 { return s.OutageProbability }), conf), 0, 1),
		BLER:              clampEstimate(meanCI(col(func(s Sample) float64 { return s.BLER }), conf), 0, 1),
		TxPowerMeanDBm:    meanCI(col(func(s Sample) float64 { return s.TxPowerMeanDBm }), conf),
		TimeAtMaxPower:    clampEstimate(meanCI(col(func(s Sample) float64 { return s.TimeAtMaxPower }), conf), 0, 1),
		NoiseRiseDB:       clampEstimate(meanCI(col(func(s Sample) float64 { return s.NoiseRiseDB }), conf), 0, math.Inf(1)), // I0/N0 >= 1
	}
	if len(xs) > 0 {
		fg.BLERTarget = xs[0].BLERTarget
	}
	for _, x := range xs {
		if x.Infeasible {
			fg.InfeasibleReplications++
		}
	}
	return fg
}

// CandidateResult is one candidate in one condition (or across conditions,
// where Figures is empty and only Objective and DiffToBest are set).
type CandidateResult struct {
	// Candidate is the grid index.
	Candidate int `json:"candidate"`
	// Figures: every figure with its interval.
	Figures Figures `json:"figures"`
	// Objective is the figure candidates were ranked by (weighted across
	// conditions): the objective's figure, or the worst relative constraint
	// excess (Objective.Excess) when no candidate met the constraints
	// (Decision.RankedBy names it).
	Objective ReplicationEstimate `json:"objective"`
	// DiffToBest is the paired difference of Objective, this candidate minus
	// the recommended candidate (Decision.Best), over their common
	// replications, in RankedBy's difference unit (zero for Best itself).
	DiffToBest ReplicationEstimate `json:"diff_to_best"`
	// Status in the sequential procedure.
	Status CandidateStatus `json:"status"`
	// Feasible: the point estimates meet the objective's constraints
	// (always true without constraints).
	Feasible bool `json:"feasible"`
}

// Verdict is the outcome of a decision: the one source of truth for what
// every table, plot and sentence says about it.
type Verdict int

const (
	// VerdictUnspecified is the zero value; never the outcome of a search.
	VerdictUnspecified Verdict = iota
	// VerdictWinner: the recommended candidate's paired difference to every
	// other candidate that meets the constraints excludes zero at the
	// stated confidence (candidates that miss the constraints rank below
	// it whatever their objective).
	VerdictWinner
	// VerdictTie: TieSet holds more than one candidate that cannot be told
	// apart at the stated confidence; Best was picked by the tie rule
	// (Decision.TieBreak). Never called a winner.
	VerdictTie
	// VerdictConstraintsUnmet: no candidate meets the constraints; Best is
	// the closest (smallest worst relative excess) and Misses says by how
	// much it misses each constraint.
	VerdictConstraintsUnmet
	// VerdictSingle: there was only one candidate; nothing was compared.
	VerdictSingle
)

// String returns the short label used in tables, e.g. "winner".
func (v Verdict) String() string {
	switch v {
	case VerdictWinner:
		return "winner"
	case VerdictTie:
		return "tie"
	case VerdictConstraintsUnmet:
		return "constraints unmet"
	case VerdictSingle:
		return "single setting"
	}
	return fmt.Sprintf("Verdict(%d)", int(v))
}

// ConstraintMiss is by how much a candidate misses one constraint in one
// condition, on the point estimates.
type ConstraintMiss struct {
	// Condition is the name of the condition.
	Condition string `json:"condition"`
	// Figure is the key of the constrained figure (FigureLabel.Key):
	// "outage_probability", "noise_rise_mean_db" or "achieved_bler".
	Figure string `json:"figure"`
	// Value is the candidate's figure and Limit the bound it misses, in the
	// figure's stored unit (probability, dB); for the BLER, Limit is the
	// nearer edge of the band τ·(1 ± tolerance).
	Value float64 `json:"value"`
	Limit float64 `json:"limit"`
	// Upper: Limit is an upper bound (Value is above it); otherwise a lower
	// bound (Value is below it).
	Upper bool `json:"upper"`
	// Excess = |Value − Limit| > 0, in the figure's stored unit (a
	// probability for proportions, dB for the noise rise).
	Excess float64 `json:"excess"`
	// Text is the miss in words with units, e.g. "outage 8.2 % against a
	// limit of 5 % (3.2 percentage points over)".
	Text string `json:"text"`
}

// WarningKind classifies a warning attached to a decision.
type WarningKind int

const (
	// WarningUnspecified is the zero value.
	WarningUnspecified WarningKind = iota
	// WarningHighOutage: the recommended setting's outage is above
	// Objective.OutageWarning (DefaultOutageWarning) in some condition.
	WarningHighOutage
	// WarningInfeasibleLoad: the engine flagged the load of the recommended
	// setting as infeasible in some replications (no powers give every user
	// its target).
	WarningInfeasibleLoad
	// WarningBudgetExhausted: the budget ran out with more than one
	// candidate still in contention.
	WarningBudgetExhausted
)

// Warning is one warning about a decision: a machine-readable kind and a
// sentence with the figures and units.
type Warning struct {
	Kind WarningKind `json:"kind"`
	Text string      `json:"text"`
}

// Decision is the verdict in one condition or across conditions.
type Decision struct {
	// Verdict is the outcome (winner, tie, constraints unmet, single).
	Verdict Verdict `json:"verdict"`
	// Best is the recommended candidate (grid index) and Setting its point.
	// Ordering[0] == Best.
	Best    int   `json:"best"`
	Setting Point `json:"setting"`
	// Ordering is every candidate, best first: Best, then the rest of the
	// tie set in tie-rule order, then the candidates that meet the
	// constraints before those that miss them, each by paired difference to
	// Best. Every table lists candidates in this order.
	Ordering []int `json:"ordering"`
	// RankedBy labels the figure candidates were ranked by: the objective's
	// figure, or the worst constraint excess when the constraints were met
	// by none.
	RankedBy FigureLabel `json:"ranked_by"`
	// Declared: the verdict is VerdictWinner.
	Declared bool `json:"declared"`
	// TieSet lists the candidates not distinguishable from the best point
	// estimate at the stated confidence (best point estimate first); with
	// more than one, Best was picked by the tie rule.
	TieSet []int `json:"tie_set"`
	// TieBreak is the key of TieRule that put Best first in the tie set,
	// e.g. "smaller inner_loop.step_db" (empty without a tie).
	TieBreak string `json:"tie_break"`
	// Leader is the candidate with the best point estimate; it differs from
	// Best only in a tie, and is never named as "the leader" in text (Best
	// is the one recommendation).
	Leader int `json:"leader"`
	// RunnerUp is Ordering[1] (-1 with one candidate) and Evidence the
	// paired difference runner-up minus Best on RankedBy, with its interval
	// at the stated confidence (positive: the runner-up is worse).
	RunnerUp int                 `json:"runner_up"`
	Evidence ReplicationEstimate `json:"evidence"`
	// ConstraintsUnmet: no candidate met the constraints (the verdict is
	// VerdictConstraintsUnmet); candidates were ranked by their worst
	// relative constraint excess.
	ConstraintsUnmet bool `json:"constraints_unmet"`
	// Misses: with ConstraintsUnmet, every constraint Best misses, per
	// condition.
	Misses []ConstraintMiss `json:"misses"`
	// Warnings about the recommended setting.
	Warnings []Warning `json:"warnings"`
	// Headline is the first line of every text output of this decision,
	// starting with the verdict: "Winner: step_db=0.5 (SIR error std 1.92
	// dB, 95 % interval [1.90, 1.94] dB).", "Tie of 2 at 95 %: ... is
	// recommended by the tie rule (smaller inner_loop.step_db); ...",
	// "Constraints unmet: no setting meets ... Closest: ..., which misses:
	// ..." or "Single setting: ...".
	Headline string `json:"headline"`
	// RunnerUpLine is the runner-up's line, e.g. "Runner-up: step_db=1, SIR
	// error std 0.12 dB worse than step_db=0.5 (95 % interval of the
	// difference [0.08, 0.16] dB, 6 paired replications)."
	RunnerUpLine string `json:"runner_up_line"`
	// Reason is a short plain-language account built from the figures.
	Reason string `json:"reason"`
}

// Baseline is the no-power-control reference of one condition: the base
// scenario under that condition with inner_loop.mode FIXED_POWER (every user
// at inner_loop.fixed_power_dbm), on the same replication seeds as the
// candidates.
type Baseline struct {
	Figures Figures `json:"figures"`
	// Figure labels the judged figure: the objective's own figure (SIR
	// error std in dB, outage in %, mean Tx power in dBm).
	Figure FigureLabel `json:"figure"`
	// Fixed and Recommended are the judged figure at fixed power and at
	// the recommended setting, in Figure's stored unit.
	Fixed       ReplicationEstimate `json:"fixed"`
	Recommended ReplicationEstimate `json:"recommended"`
	// Gain is the paired improvement of the recommended setting over fixed
	// power on the judged figure (fixed minus recommended; positive = power
	// control helps), in Figure's difference unit: dB for SIR error std and
	// for Tx power (power saved), a probability for outage.
	Gain ReplicationEstimate `json:"gain"`
	// BarelyHelps: Gain's interval reaches zero, or Gain is below
	// BarelyHelpsFraction of the fixed-power figure (SIR error std, outage)
	// or below BarelyHelpsPowerDB (Tx power). Never set when FixedMisses.
	BarelyHelps bool `json:"barely_helps"`
	// FixedMisses: under the Tx power objective, fixed power misses the
	// objective's constraints, so its power is no reference: power control
	// is what meets them.
	FixedMisses bool `json:"fixed_misses"`
	// Text is the comparison in one line with units.
	Text string `json:"text"`
}

// BarelyHelpsPowerDB: under the Tx power objective, power control "barely
// helps" when it saves less than this much mean power over fixed power, dB
// (our choice: below the usual dB-level uncertainty of a link budget).
const BarelyHelpsPowerDB = 1.0

// ConditionResult is everything about one condition.
type ConditionResult struct {
	Name       string            `json:"name"`
	Weight     float64           `json:"weight"`
	Decision   Decision          `json:"decision"`
	Candidates []CandidateResult `json:"candidates"`
	Baseline   *Baseline         `json:"baseline,omitempty"`
	// DopplerProductMin and DopplerProductMax are the smallest and largest
	// f_D·T over the users of the recommended setting (f_D = v·f_c/c,
	// T = 1/update_rate_hz) and SpeedsKmh the distinct user speeds of the
	// condition, ascending, km/h.
	DopplerProductMin float64   `json:"doppler_product_min"`
	DopplerProductMax float64   `json:"doppler_product_max"`
	SpeedsKmh         []float64 `json:"speeds_kmh"`
}

// Recommendation is the answer of Tune.
type Recommendation struct {
	Objective  Objective `json:"objective"`
	Confidence float64   `json:"confidence"`
	// Axes as resolved (values listed).
	Axes []Axis `json:"axes"`
	// Candidates in grid order.
	Candidates []Point `json:"candidates"`
	// Conditions in request order.
	Conditions []ConditionResult `json:"conditions"`
	// Overall is the verdict on the weighted combination over conditions
	// (the same as the single condition's when there is one).
	Overall Decision `json:"overall"`
	// OverallCandidates: the weighted objective per candidate.
	OverallCandidates []CandidateResult `json:"overall_candidates"`
	// Effort spent.
	Effort Effort `json:"effort"`
	// Seed is the base scenario's run.seed.
	Seed uint64 `json:"seed"`
	// TieRule states how ties are broken.
	TieRule string `json:"tie_rule"`
	// Figures labels every figure of Figures (name, unit, difference
	// unit, display scale) in FigureKeys order.
	Figures []FigureLabel `json:"figures"`
	// Notice is the statement every output carries: simulated settings do
	// not replace the operator's planning (Notice).
	Notice string `json:"notice"`
}

// TieRule is the documented order in which a tie set is broken: the first
// candidate in this order wins.
const TieRule = "smaller inner_loop.step_db, then lower inner_loop.update_rate_hz, " +
	"then smaller outer_loop.up_step_db, then longer inner_loop.feedback_delay_slots, " +
	"then smaller values of the other axes in axis order, then grid order"

var tiePriority = []struct {
	path string
	asc  bool
}{
	{StepPath, true},
	{RatePath, true},
	{"outer_loop.up_step_db", true},
	{"inner_loop.feedback_delay_slots", false},
}

// tieKey names the TieRule key that puts a before b, e.g. "smaller
// inner_loop.step_db".
func tieKey(a, b Point) string {
	for _, tp := range tiePriority {
		va, oka := a.Value(tp.path)
		vb, okb := b.Value(tp.path)
		if !oka || !okb || va == vb {
			continue
		}
		switch {
		case tp.path == RatePath:
			return "lower inner_loop.update_rate_hz"
		case tp.asc:
			return "smaller " + tp.path
		default:
			return "longer " + tp.path
		}
	}
	for i := range a.Coords {
		if a.Coords[i].Value != b.Coords[i].Value {
			return "smaller " + a.Coords[i].Path
		}
	}
	return "grid order"
}

// tieLess orders grid points by TieRule.
func tieLess(a, b Point) bool {
	for _, tp := range tiePriority {
		va, oka := a.Value(tp.path)
		vb, okb := b.Value(tp.path)
		if !oka || !okb || va == vb {
			continue
		}
		if tp.asc {
			return va < vb
		}
		return va > vb
	}
	for i := range a.Coords {
		if a.Coords[i].Value != b.Coords[i].Value {
			return a.Coords[i].Value < b.Coords[i].Value
		}
	}
	return a.Index < b.Index
}

// evaluator runs one replication of sc (run.replications = 1, run.seed
// set, normalised and valid) and returns its figures.
type evaluator func(ctx context.Context, sc *loop.Scenario) (Sample, error)

// minRunCost is the user-slots of the cheapest run of a tune over the
// candidate scenarios scs ([k][c]): a candidate's, or the fixed-power
// baseline's of a condition (the condition applied to the base: the
// baseline changes no field that sets the work).
func minRunCost(req Request, scs [][]loop.Scenario, conds []Condition) int64 {
	m := int64(math.MaxInt64)
	for k := range scs {
		for c := range scs[k] {
			m = min(m, userSlots(&scs[k][c]))
		}
	}
	if !req.SkipBaseline {
		for _, cd := range conds {
			if sc, err := cd.ApplyTo(req.Base); err == nil {
				sc.Normalise()
				m = min(m, userSlots(&sc))
			}
		}
	}
	return m
}

// userSlots is the work of one replication of sc.
func userSlots(sc *loop.Scenario) int64 {
	return int64(sc.Users()) * sc.TotalSlots()
}

// DopplerProductMax returns the largest f_D·T over the users of sc: f_D =
// v·f_c/c (fading.DopplerHz) over every speed of every group, T =
// 1/inner_loop.update_rate_hz. It returns 0 for a scenario without speeds or
// with a non-positive update rate.
func DopplerProductMax(sc loop.Scenario) float64 {
	if !(sc.InnerLoop.UpdateRateHz > 0) {
		return 0
	}
	var m float64
	for _, g := range sc.Groups {
		for _, s := range g.Speeds {
			m = math.Max(m, fading.DopplerHz(s.SpeedKmh, g.CarrierFrequencyHz)/sc.InnerLoop.UpdateRateHz)
		}
	}
	return m
}

// DopplerRange returns the smallest and largest f_D·T over the users of sc
// (f_D = v·f_c/c by fading.DopplerHz over every speed of every group with
// users, T = 1/inner_loop.update_rate_hz) and the distinct speeds, km/h,
// ascending. The products are 0 without speeds or with a non-positive
// update rate.
func DopplerRange(sc loop.Scenario) (lo, hi float64, speedsKmh []float64) {
	seen := map[float64]bool{}
	lo = math.Inf(1)
	for _, g := range sc.Groups {
		if g.Count <= 0 {
			continue
		}
		for _, s := range g.Speeds {
			if !seen[s.SpeedKmh] {
				seen[s.SpeedKmh] = true
				speedsKmh = append(speedsKmh, s.SpeedKmh)
			}
			if sc.InnerLoop.UpdateRateHz > 0 {
				x := fading.DopplerHz(s.SpeedKmh, g.CarrierFrequencyHz) / sc.InnerLoop.UpdateRateHz
				lo, hi = math.Min(lo, x), math.Max(hi, x)
			}
		}
	}
	if math.IsInf(lo, 1) {
		lo = 0
	}
	sort.Float64s(speedsKmh)
	return lo, hi, speedsKmh
}

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
			for _, x := range sc.Validate() {
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

// Tune answers req: every candidate of the grid under every condition, with
// common random numbers and sequential allocation of replications (see the
// package documentation). Bad requests return loop.Violations naming each
// field; a budget too small for the first round returns *BudgetError; a
// cancelled ctx stops every run and returns ctx.Err(). The result is
// identical for identical requests whatever opt.Parallelism or GOMAXPROCS.
// It is PlanTune followed by TunePlan.Run.
func Tune(ctx context.Context, req Request, opt Options) (*Recommendation, error) {
	return tuneWith(ctx, req, opt, evaluatorFor(opt))
}

func tuneWith(ctx context.Context, req Request, opt Options, eval evaluator) (*Recommendation, error) {
	p, err := PlanTune(req)
	if err != nil {
		return nil, err
	}
	return p.run(ctx, opt, eval)
}

// Run answers the plan's request as Tune does: it builds and validates
// every candidate scenario under every condition (a violation of a
// combination of axis values and overrides is reported here, after
// admission), then runs the search.
func (p *TunePlan) Run(ctx context.Context, opt Options) (*Recommendation, error) {
	return p.run(ctx, opt, evaluatorFor(opt))
}

func (p *TunePlan) run(ctx context.Context, opt Options, eval evaluator) (*Recommendation, error) {
	req, grid, set := p.req, p.grid, p.set
	pts := grid.Points()
	scs, v := buildScenarios(req.Base, pts, set.conds)
	if len(v) > 0 {
		return nil, v
	}
	seed := req.Base.Run.Seed
	e := &engine{
		nK: len(pts), nC: len(set.conds), w: set.weights,
		obj: req.Objective, conf: set.conf,
		minReps: set.minReps, maxReps: set.maxReps, batch: set.batchReps,
		maxUserSlots: set.maxUserSlots,
		jobCost:      func(k, c int) int64 { return userSlots(&scs[k][c]) },
		tieLess:      func(a, b int) bool { return tieLess(pts[a], pts[b]) },
		parallel:     opt.Parallelism,
		progress:     opt.Progress,
		minRunCost:   minRunCost(req, scs, set.conds),
		run: func(ctx context.Context, k, c, r int) (Sample, error) {
			sc := scs[k][c]
			sc.Run.Seed = ReplicationSeed(seed, c, r)
			return eval(ctx, &sc)
		},
	}
	if !req.SkipBaseline {
		e.baselineRuns = len(set.conds) * set.maxReps
	}
	outs, err := e.search(ctx)
	if err != nil {
		return nil, err
	}
	rec := &Recommendation{
		Objective:  req.Objective,
		Confidence: set.conf,
		Axes:       grid.Axes,
		Candidates: pts,
		Effort:     e.effort,
		Seed:       seed,
		TieRule:    TieRule,
		Figures:    FigureLabels(),
		Notice:     Notice,
	}
	for c, cd := range set.conds {
		o := outs[c]
		cr := ConditionResult{Name: cd.Name, Weight: cd.Weight}
		cr.Candidates = make([]CandidateResult, len(pts))
		for k := range pts {
			cr.Candidates[k] = CandidateResult{
				Candidate:  k,
				Figures:    figures(e.samples[k][c], set.conf),
				Objective:  o.score[k],
				DiffToBest: o.diff[k],
				Status:     o.status[k],
				Feasible:   o.feasible[k],
			}
		}
		cr.Decision = decision(o, pts, req.Objective)
		cr.DopplerProductMin, cr.DopplerProductMax, cr.SpeedsKmh = DopplerRange(scs[o.chosen][c])
		rec.Conditions = append(rec.Conditions, cr)
	}
	if !req.SkipBaseline {
		if err := runBaselines(ctx, req, set, e, outs, rec, eval); err != nil {
			return nil, err
		}
	}
	last := outs[len(outs)-1]
	rec.Overall = decision(last, pts, req.Objective)
	rec.OverallCandidates = make([]CandidateResult, len(pts))
	for k := range pts {
		rec.OverallCandidates[k] = CandidateResult{
			Candidate: k, Objective: last.score[k], DiffToBest: last.diff[k],
			Status: last.status[k], Feasible: last.feasible[k],
		}
	}
	for c := range rec.Conditions {
		finishDecision(rec, &rec.Conditions[c].Decision, []int{c}, rec.Conditions[c].Candidates)
		rec.Conditions[c].Decision.Reason = conditionReason(rec, c)
	}
	all := make([]int, len(rec.Conditions))
	for c := range all {
		all[c] = c
	}
	finishDecision(rec, &rec.Overall, all, rec.OverallCandidates)
	rec.Overall.Reason = overallReason(rec)
	e.report(true)
	return rec, nil
}

func decision(o scopeOutcome, pts []Point, obj Objective) Decision {
	d := Decision{
		Best:             o.chosen,
		Setting:          pts[o.chosen],
		Ordering:         append([]int(nil), o.ordering...),
		RankedBy:         obj.Figure(),
		Declared:         o.declared,
		TieSet:           append([]int(nil), o.tieSet...),
		Leader:           o.best,
		RunnerUp:         o.runnerUp,
		Evidence:         o.evidence,
		ConstraintsUnmet: o.fallback,
	}
	if o.fallback {
		d.RankedBy = FigureLabelOf(FigureConstraintExcess)
	}
	switch {
	case o.fallback:
		d.Verdict = VerdictConstraintsUnmet
	case len(pts) == 1:
		d.Verdict = VerdictSingle
	case len(o.tieSet) > 1:
		d.Verdict = VerdictTie
	default:
		d.Verdict = VerdictWinner
	}
	d.Declared = d.Verdict == VerdictWinner
	if len(o.tieSet) > 1 {
		other := o.best
		if other == o.chosen {
			for _, k := range o.tieSet {
				if k != o.chosen {
					other = k
					break
				}
			}
		}
		d.TieBreak = tieKey(pts[o.chosen], pts[other])
	}
	return d
}

// runBaselines runs the fixed-power baseline of every condition on the seeds
// of the recommended candidate's replications and fills rec.Conditions[c].
// Baseline.
func runBaselines(ctx context.Context, req Request, set settings, e *engine, outs []scopeOutcome, rec *Recommendation, eval evaluator) error {
	seed := req.Base.Run.Seed
	bases := make([]loop.Scenario, len(set.conds))
	var jobs []job
	var cost int64
	for c, cd := range set.conds {
		sc := req.Base.Clone()
		if err := cd.Apply(&sc); err != nil {
			return err
		}
		sc.InnerLoop.Mode = loop.InnerModeFixedPower
		sc.Run.Replications = 1
		sc.Normalise()
		if vv := sc.Validate(); len(vv) > 0 {
			for i := range vv {
				vv[i].Rule += fmt.Sprintf(" (fixed-power baseline, condition %q)", cd.Name)
			}
			return vv
		}
		bases[c] = sc
		n := len(e.samples[outs[c].chosen][c])
		for r := 0; r < n; r++ {
			jobs = append(jobs, job{k: 0, c: c, r: r})
		}
		cost += int64(n) * userSlots(&sc)
	}
	if set.maxUserSlots > 0 && e.effort.UserSlots+cost > set.maxUserSlots {
		// Not enough budget left for the full baseline: run the first
		// MinReplications only, or none when even that does not fit.
		jobs = jobs[:0]
		cost = 0
		for c := range set.conds {
			for r := 0; r < set.minReps; r++ {
				jobs = append(jobs, job{k: 0, c: c, r: r})
			}
			cost += int64(set.minReps) * userSlots(&bases[c])
		}
		if e.effort.UserSlots+cost > set.maxUserSlots {
			e.left = 0
			return nil
		}
	}
	samples := make([][]Sample, len(set.conds))
	e.left = len(jobs)
	err := e.runJobs(ctx, jobs, func(ctx context.Context, j job) (Sample, error) {
		sc := bases[j.c]
		sc.Run.Seed = ReplicationSeed(seed, j.c, j.r)
		return eval(ctx, &sc)
	}, func(j job, s Sample) {
		samples[j.c] = append(samples[j.c], s)
		e.effort.BaselineReplications++
		e.effort.UserSlots += s.UserSlots
	})
	if err != nil {
		return err
	}
	rec.Effort = e.effort
	lab, judge := req.Objective.baselineJudge()
	for c := range set.conds {
		chosen := e.samples[outs[c].chosen][c]
		a := make([]float64, len(chosen))
		for r, s := range chosen {
			a[r] = judge(s)
		}
		b := make([]float64, len(samples[c]))
		for r, s := range samples[c] {
			b[r] = judge(s)
		}
		gain, _ := pairedDiff(a, b, set.conf, nil)
		bl := &Baseline{
			Figures: figures(samples[c], set.conf), Figure: lab,
			Fixed: meanCI(b, set.conf), Recommended: meanCI(a, set.conf), Gain: gain,
		}
		if lab.Key == "outage_probability" {
			bl.Fixed = clampEstimate(bl.Fixed, 0, 1)
			bl.Recommended = clampEstimate(bl.Recommended, 0, 1)
		}
		if req.Objective.Kind == ObjectiveMinTxPower {
			bl.FixedMisses = len(missesOf(req.Objective, set.conds[c].Name, bl.Figures)) > 0
			bl.BarelyHelps = !bl.FixedMisses && (gain.Low <= 0 || gain.Mean < BarelyHelpsPowerDB)
		} else {
			bl.BarelyHelps = gain.Low <= 0 || gain.Mean < BarelyHelpsFraction*math.Abs(bl.Fixed.Mean)
		}
		bl.Text = baselineText(rec, c, bl)
		rec.Conditions[c].Baseline = bl
	}
	return nil
}
