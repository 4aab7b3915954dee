package tune

import (
	"math"
	"sort"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
)

// This file holds the answer of Tune: figures, candidates, decisions,
// baselines and the recommendation.

// TuneFigures (fadeloop.v1.TuneFigures) is every figure of one candidate
// under one condition, each with its interval over replications at the
// request's confidence.
type TuneFigures struct {
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
	// OtherToOwn is f in multi-cell mode, the layout-wide other-cell /
	// own-cell interference ratio (linear, >= 0) over replications; nil
	// for a single cell (or when no replication ran on a layout).
	OtherToOwn *ReplicationEstimate `json:"other_to_own,omitempty"`
}

// figures summarises samples at confidence conf.
func figures(xs []Sample, conf float64) TuneFigures {
	col := func(f func(Sample) float64) []float64 {
		out := make([]float64, len(xs))
		for i, x := range xs {
			out[i] = f(x)
		}
		return out
	}
	fg := TuneFigures{
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
	if len(xs) > 0 && xs[0].Layout {
		f := clampEstimate(meanCI(col(func(s Sample) float64 { return s.OtherToOwn }), conf), 0, math.Inf(1))
		fg.OtherToOwn = &f
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
	Figures TuneFigures `json:"figures"`
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
	// more than one, Best was picked by the tie rule. With ConstraintsUnmet
	// it holds Best alone: the closest candidate is never replaced by the
	// tie rule.
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
	Figures TuneFigures `json:"figures"`
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
	// Notice is the statement every output carries once (loop.Caution):
	// simulated settings do not replace the operator's planning.
	Notice string `json:"notice"`
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
