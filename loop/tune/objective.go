package tune

import (
	"math"
)

// ObjectiveKind selects what the tuner minimises.
type ObjectiveKind int

const (
	// ObjectiveUnspecified is the zero value; it is rejected.
	ObjectiveUnspecified ObjectiveKind = iota
	// ObjectiveMinSIRErrorStd minimises the standard deviation of the SIR
	// error (true SIR minus target, dB) over users and slots, the
	// figure a tight inner loop keeps small.
	ObjectiveMinSIRErrorStd
	// ObjectiveMinOutage minimises the outage probability (fraction of
	// user-slots with SIR below target minus the outage margin).
	ObjectiveMinOutage
	// ObjectiveMinTxPower minimises the mean transmit power (dBm) subject to
	// outage ≤ Objective.OutageLimit and, when the outer loop is on, the
	// achieved BLER within Objective.BLERTolerance of its target.
	ObjectiveMinTxPower
)

// DefaultOutageWarning is the outage probability above which a recommended
// setting carries a high-outage warning when Objective.OutageWarning is 0:
// 10 %. (common practice: dimensioning targets for circuit-switched uplink
// coverage are a few per cent outage; 10 % is well past any of them, so a
// setting above it is not one to sign off without a second look.)
const DefaultOutageWarning = 0.10

// DefaultBLERTolerance is the BLER constraint's relative tolerance of the
// minimum Tx power objective when Objective.BLERTolerance is 0: ±20 %.
const DefaultBLERTolerance = 0.2

// Objective is what the tuner minimises in every condition; across
// conditions it minimises the weighted mean Σ_c w_c·x_c / Σ_c w_c of the same
// per-condition figure x_c (condition weights w_c), replication by
// replication, so the across-condition comparison is paired as well.
//
// Constraints apply to every kind. A candidate meets them in a condition
// when the point estimates (means over replications) satisfy every active
// one: outage ≤ OutageLimit (when set), mean noise rise ≤ NoiseRiseLimitDB
// (when set), and |BLER/τ − 1| ≤ BLER tolerance (when the BLER constraint
// is active, see BLERTolerance). Candidates that meet them always rank
// before those that do not. When none does, the verdict is
// VerdictConstraintsUnmet and the candidates are ranked by their worst
// relative constraint excess (Objective.Excess) instead of the objective.
type Objective struct {
	// Kind selects the figure.
	Kind ObjectiveKind `json:"kind"`
	// OutageLimit is the largest acceptable outage probability, [0, 1);
	// 0 means no outage constraint, except for ObjectiveMinTxPower, which
	// requires it in (0, 1).
	OutageLimit float64 `json:"outage_limit"`
	// BLERTolerance is the accepted relative deviation of the achieved BLER
	// from the outer loop's target τ, |BLER/τ − 1| ≤ tolerance, in [0, 10].
	// The BLER constraint is active for candidates whose outer loop is on,
	// and only for ObjectiveMinTxPower (where 0 means
	// DefaultBLERTolerance, ±20 %) or when the tolerance is set (> 0).
	BLERTolerance float64 `json:"bler_tolerance"`
	// IndifferenceZone is the difference in the objective's units (dB for
	// SIR error std and Tx power, probability for outage) below which two
	// settings count as equally good: once the paired interval of their
	// difference lies inside ±IndifferenceZone they are a tie and get no
	// more replications. Zero means the default: 0.05 dB, 0.1 dB, or 2 % of
	// the best candidate's outage (at least 1e−4) respectively.
	IndifferenceZone float64 `json:"indifference_zone"`
	// NoiseRiseLimitDB is the largest acceptable mean noise rise (rise over
	// thermal) at the receiver, dB, [0, 40]; 0 means no noise-rise
	// constraint.
	NoiseRiseLimitDB float64 `json:"noise_rise_limit_db"`
	// OutageWarning is the outage probability above which the recommended
	// setting gets a high-outage warning, [0, 1]; 0 means
	// DefaultOutageWarning (10 %), 1 turns the warning off.
	OutageWarning float64 `json:"outage_warning"`
}

func (o Objective) validate(add func(path, rule string)) {
	switch o.Kind {
	case ObjectiveMinSIRErrorStd, ObjectiveMinOutage:
		if !(o.OutageLimit >= 0 && o.OutageLimit < 1) {
			add("objective.outage_limit", "must be in [0, 1) (0: no outage constraint)")
		}
	case ObjectiveMinTxPower:
		if !(o.OutageLimit > 0 && o.OutageLimit < 1) {
			add("objective.outage_limit", "must be in (0, 1) for the minimum Tx power objective")
		}
	default:
		add("objective.kind", "must be one of OBJECTIVE_KIND_MIN_SIR_ERROR_STD, OBJECTIVE_KIND_MIN_OUTAGE, OBJECTIVE_KIND_MIN_TX_POWER")
	}
	if !(o.BLERTolerance >= 0 && o.BLERTolerance <= 10) {
		add("objective.bler_tolerance", "must be in [0, 10] (relative deviation)")
	}
	if !(o.IndifferenceZone >= 0 && o.IndifferenceZone < math.Inf(1)) {
		add("objective.indifference_zone", "must be finite and >= 0")
	}
	if !(o.NoiseRiseLimitDB >= 0 && o.NoiseRiseLimitDB <= 40) {
		add("objective.noise_rise_limit_db", "must be in [0, 40] dB (0: no noise-rise constraint)")
	}
	if !(o.OutageWarning >= 0 && o.OutageWarning <= 1) {
		add("objective.outage_warning", "must be in [0, 1] (0: the default 10 %, 1: no warning)")
	}
}

func (o Objective) blerTol() float64 {
	if o.BLERTolerance == 0 {
		return DefaultBLERTolerance
	}
	return o.BLERTolerance
}

// blerActive reports whether the BLER constraint applies to a run whose
// outer-loop target is target (0: outer loop off).
func (o Objective) blerActive(target float64) bool {
	return target > 0 && (o.Kind == ObjectiveMinTxPower || o.BLERTolerance > 0)
}

// constrained reports whether any constraint can be active.
func (o Objective) constrained() bool {
	return o.Kind == ObjectiveMinTxPower || o.OutageLimit > 0 || o.NoiseRiseLimitDB > 0 || o.BLERTolerance > 0
}

// outageWarning is the effective high-outage warning level.
func (o Objective) outageWarning() float64 {
	if o.OutageWarning == 0 {
		return DefaultOutageWarning
	}
	return o.OutageWarning
}

// Excess is the worst relative excess of s over the active constraints,
// the figure candidates are ranked by when none meets the constraints:
// the largest of (outage − OutageLimit)/OutageLimit, (noise rise −
// NoiseRiseLimitDB)/NoiseRiseLimitDB and |BLER/τ − 1| − tolerance, over the
// active ones (dimensionless; ≤ 0 when s meets them all; 0 without active
// constraints).
func (o Objective) Excess(s Sample) float64 {
	m := math.Inf(-1)
	if o.OutageLimit > 0 {
		m = math.Max(m, (s.OutageProbability-o.OutageLimit)/o.OutageLimit)
	}
	if o.NoiseRiseLimitDB > 0 {
		m = math.Max(m, (s.NoiseRiseDB-o.NoiseRiseLimitDB)/o.NoiseRiseLimitDB)
	}
	if o.blerActive(s.BLERTarget) {
		m = math.Max(m, math.Abs(s.BLER/s.BLERTarget-1)-o.blerTol())
	}
	if math.IsInf(m, -1) {
		return 0
	}
	return m
}

// indifference returns the indifference zone for a scope whose best
// candidate scores best (objective units).
func (o Objective) indifference(best float64) float64 {
	if o.IndifferenceZone > 0 {
		return o.IndifferenceZone
	}
	switch o.Kind {
	case ObjectiveMinSIRErrorStd:
		return DefaultIndifferenceStdDB
	case ObjectiveMinTxPower:
		return DefaultIndifferencePowerDB
	default:
		return math.Max(MinIndifferenceOutage, DefaultIndifferenceOutageShare*math.Abs(best))
	}
}

// Default indifference zones (Objective.IndifferenceZone 0), by objective
// (common practice: below what an operator would act on).
const (
	DefaultIndifferenceStdDB       = 0.05 // SIR error std, dB
	DefaultIndifferencePowerDB     = 0.1  // mean Tx power, dB
	DefaultIndifferenceOutageShare = 0.02 // outage: this share of the best candidate's outage …
	MinIndifferenceOutage          = 1e-4 // … and at least this probability
)

// score is the per-replication figure the objective minimises.
func (o Objective) score(s Sample) float64 {
	switch o.Kind {
	case ObjectiveMinSIRErrorStd:
		return s.SIRErrorStdDB
	case ObjectiveMinOutage:
		return s.OutageProbability
	default:
		return s.TxPowerMeanDBm
	}
}

// Figure returns the label of the figure the objective minimises.
func (o Objective) Figure() FigureLabel {
	switch o.Kind {
	case ObjectiveMinSIRErrorStd:
		return FigureLabelOf(FigureSIRErrorStd)
	case ObjectiveMinOutage:
		return FigureLabelOf(FigureOutage)
	default:
		return FigureLabelOf(FigureTxPowerMean)
	}
}

// baselineJudge returns the figure on which the recommended setting is
// compared with fixed power: the objective's own figure.
func (o Objective) baselineJudge() (FigureLabel, func(Sample) float64) {
	return o.Figure(), o.score
}
