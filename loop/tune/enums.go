package tune

import (
	"fmt"
	"strconv"
)

// Text forms of the enumerations (JSON, YAML): the value names of the
// proposed fadeloop.v1 proto enums, so request files read the same in both.
var (
	objectiveKindNames   = []string{"OBJECTIVE_KIND_UNSPECIFIED", "OBJECTIVE_KIND_MIN_SIR_ERROR_STD", "OBJECTIVE_KIND_MIN_OUTAGE", "OBJECTIVE_KIND_MIN_TX_POWER"}
	candidateStatusNames = []string{"CANDIDATE_STATUS_UNSPECIFIED", "CANDIDATE_STATUS_CONTENDING", "CANDIDATE_STATUS_DROPPED", "CANDIDATE_STATUS_EQUIVALENT"}
	verdictNames         = []string{"VERDICT_UNSPECIFIED", "VERDICT_WINNER", "VERDICT_TIE", "VERDICT_CONSTRAINTS_UNMET", "VERDICT_SINGLE"}
	warningKindNames     = []string{"WARNING_KIND_UNSPECIFIED", "WARNING_KIND_HIGH_OUTAGE", "WARNING_KIND_INFEASIBLE_LOAD", "WARNING_KIND_BUDGET_EXHAUSTED"}
)

// Labels of the enumerations in text (reasons, tables, errors): String.
var (
	objectiveKindLabels   = []string{ObjectiveMinSIRErrorStd: "SIR error std", ObjectiveMinOutage: "outage probability", ObjectiveMinTxPower: "mean Tx power"}
	candidateStatusLabels = []string{StatusContending: "contending", StatusDropped: "dropped", StatusEquivalent: "equivalent"}
	verdictLabels         = []string{VerdictWinner: "winner", VerdictTie: "tie", VerdictConstraintsUnmet: "constraints unmet", VerdictSingle: "single setting"}
)

// enumLabel is labels[v], or "kind(v)" for a value without a label.
func enumLabel(labels []string, kind string, v int) string {
	if v >= 0 && v < len(labels) && labels[v] != "" {
		return labels[v]
	}
	return fmt.Sprintf("%s(%d)", kind, v)
}

// String returns the name used in reasons and errors, e.g. "SIR error std".
func (k ObjectiveKind) String() string {
	return enumLabel(objectiveKindLabels, "ObjectiveKind", int(k))
}

// String returns a short name, e.g. "dropped".
func (s CandidateStatus) String() string {
	return enumLabel(candidateStatusLabels, "CandidateStatus", int(s))
}

// String returns the short label used in tables, e.g. "winner".
func (v Verdict) String() string { return enumLabel(verdictLabels, "Verdict", int(v)) }

func parseEnum(names []string, kind string, b []byte) (int, error) {
	s := string(b)
	for i, n := range names {
		if n == s {
			return i, nil
		}
	}
	if v, err := strconv.Atoi(s); err == nil && v >= 0 && v < len(names) {
		return v, nil
	}
	return 0, fmt.Errorf("unknown %s %q", kind, s)
}

func enumName(names []string, v int) string {
	if v >= 0 && v < len(names) {
		return names[v]
	}
	return strconv.Itoa(v)
}

// MarshalText returns the proto value name, e.g. "OBJECTIVE_KIND_MIN_OUTAGE".
func (k ObjectiveKind) MarshalText() ([]byte, error) {
	return []byte(enumName(objectiveKindNames, int(k))), nil
}

// UnmarshalText accepts the proto value name or its number.
func (k *ObjectiveKind) UnmarshalText(b []byte) error {
	v, err := parseEnum(objectiveKindNames, "objective kind", b)
	*k = ObjectiveKind(v)
	return err
}

// MarshalText returns the proto value name, e.g. "CANDIDATE_STATUS_DROPPED".
func (s CandidateStatus) MarshalText() ([]byte, error) {
	return []byte(enumName(candidateStatusNames, int(s))), nil
}

// UnmarshalText accepts the proto value name or its number.
func (s *CandidateStatus) UnmarshalText(b []byte) error {
	v, err := parseEnum(candidateStatusNames, "candidate status", b)
	*s = CandidateStatus(v)
	return err
}

// MarshalText returns the proto value name, e.g. "VERDICT_TIE".
func (v Verdict) MarshalText() ([]byte, error) {
	return []byte(enumName(verdictNames, int(v))), nil
}

// UnmarshalText accepts the proto value name or its number.
func (v *Verdict) UnmarshalText(b []byte) error {
	x, err := parseEnum(verdictNames, "verdict", b)
	*v = Verdict(x)
	return err
}

// MarshalText returns the proto value name, e.g. "WARNING_KIND_HIGH_OUTAGE".
func (k WarningKind) MarshalText() ([]byte, error) {
	return []byte(enumName(warningKindNames, int(k))), nil
}

// UnmarshalText accepts the proto value name or its number.
func (k *WarningKind) UnmarshalText(b []byte) error {
	x, err := parseEnum(warningKindNames, "warning kind", b)
	*k = WarningKind(x)
	return err
}
