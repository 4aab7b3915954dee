package tune

import (
	"fmt"
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

// String returns the name used in reasons and errors.
func (k ObjectiveKind) String() string {
	switch k {
	case ObjectiveMinSIRErrorStd:
		return "SIR error std"
	case ObjectiveMinOutage:
		return "outage probability"
	case ObjectiveMinTxPower:
		return "mean Tx power"
	}
	return fmt.Sprintf("ObjectiveKind(%d)", int(k))
}

// Objective is what the tuner minimises in every condition; across
// conditions it minimises the weighted mean Σ_c w_c·x_c / Σ_c w_c of the same
// per-condition figure x_c (condition weights w_c), replication by
// replication, so the across-condition comparison is paired as well.
type Objective struct {
	// Kind selects the figure.
	Kind ObjectiveKind `json:"kind"`
	// OutageLimit is the largest acceptable outage probability, (0, 1);
	// used by ObjectiveMinTxPower (required there).
	OutageLimit float64 `json:"outage_limit"`
	// BLERTolerance is the accepted relative deviation of the achieved BLER
	// from its target, |BLER/τ − 1| ≤ tolerance, in [0, 10]; used by
	// ObjectiveMinTxPower when the candidate's outer loop is enabled. Zero
	// means 0.2 (±20 %).
	BLERTolerance float64 `json:"bler_tolerance"`
	// IndifferenceZone is the difference in the objective's units (dB for
	// SIR error std and Tx power, probability for outage) below which two
	// settings count as equally good: once the paired interval of their
	// difference lies inside ±IndifferenceZone they are a tie and get no
	// more replications. Zero means the default: 0.05 dB, 0.1 dB, or 2 % of
	// the best candidate's outage (at least 1e−4) respectively.
	IndifferenceZone float64 `json:"indifference_zone"`
}

func (o Objective) validate(add func(path, rule string)) {
	switch o.Kind {
	case ObjectiveMinSIRErrorStd, ObjectiveMinOutage:
	case ObjectiveMinTxPower:
		if !(o.OutageLimit > 0 && o.OutageLimit < 1) {
			add("objective.outage_limit", "must be in (0, 1) for the minimum Tx power objective")
		}
	default:
		add("objective.kind", "must be one of SIR error std, outage, Tx power")
	}
	if !(o.BLERTolerance >= 0 && o.BLERTolerance <= 10) {
		add("objective.bler_tolerance", "must be in [0, 10] (relative deviation)")
	}
	if !(o.IndifferenceZone >= 0 && o.IndifferenceZone < math.Inf(1)) {
		add("objective.indifference_zone", "must be finite and >= 0")
	}
}

func (o Objective) blerTol() float64 {
	if o.BLERTolerance == 0 {
		return 0.2
	}
	return o.BLERTolerance
}

// indifference returns the indifference zone for a scope whose best
// candidate scores best (objective units).
func (o Objective) indifference(best float64) float64 {
	if o.IndifferenceZone > 0 {
		return o.IndifferenceZone
	}
	switch o.Kind {
	case ObjectiveMinSIRErrorStd:
		return 0.05
	case ObjectiveMinTxPower:
		return 0.1
	default:
		return math.Max(1e-4, 0.02*math.Abs(best))
	}
}

// score is the per-replication figure the objective minimises.
func (o Objective) score(s Sample) float64 {
	switch o.Kind {
	case ObjectiveMinSIRErrorStd:
		return s.SIRErrorStdDB
	case ObjectiveMinOutage:
		return s.OutageProb
	default:
		return s.TxPowerMeanDBm
	}
}
