package jobs

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"sort"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
	"github.com/fadeloop/fadeloop/loop/tune"
)

// SweepSpec is a sweep job: the base scenario, the grid axes (tune.Axis:
// listed values or a from/to/count range), the seed rule and, optionally,
// the subset of grid indices to compute.
type SweepSpec struct {
	Base loop.Scenario `json:"base"`
	Axes []tune.Axis   `json:"axes"`
	// PerPointSeed gives grid point i its own seed, SplitMix64 of
	// base seed + (i+1)·0x9E3779B97F4A7C15 (the sweep's SEED_MODE_PER_POINT);
	// false runs every point with the base seed (common random numbers,
	// SEED_MODE_COMMON).
	PerPointSeed bool `json:"per_point_seed"`
	// Points lists the grid indices to compute (ascending, distinct, each in
	// [0, grid size)); empty means every point.
	Points []int `json:"points"`
	// Detailed keeps the per-user and per-distance-bin figures and the
	// normalised scenario in each stored report; otherwise only the
	// aggregate, feasibility and run figures are kept (smaller results).
	Detailed bool `json:"detailed"`
}

// Kind names a unit type.
type Kind string

// Unit kinds.
const (
	KindSweepPoint      Kind = "sweep_point"      // one sweep grid point
	KindTuneReplication Kind = "tune_replication" // one tune candidate × condition × replication
)

// Prepared is a validated, normalised sweep job: its ID, grid and the
// indices of its units.
type Prepared struct {
	ID      string
	Spec    SweepSpec // normalised: base normalised, axes resolved to values, Points filled
	Grid    *tune.Grid
	Indices []int // grid indices of the units, ascending
}

// Prepare normalises and validates spec: the base scenario, the axes (see
// tune.NewGrid), the point subset, and the scenario of every point to
// compute. Invalid input returns loop.Violations naming the field and rule.
// The job ID is the hex SHA-256 (first 16 bytes) of the normalised spec and
// loop.EngineVersion, so the same request always has the same ID.
func Prepare(spec SweepSpec) (*Prepared, error) {
	s := spec
	s.Base = spec.Base.Clone()
	s.Base.Normalise()
	if v := multicell.Validate(s.Base); len(v) > 0 {
		return nil, prefixViolations(v, "base.")
	}
	g, err := tune.NewGrid(s.Base, s.Axes)
	if err != nil {
		return nil, err
	}
	s.Axes = g.Axes
	if v := tune.CheckAxes(s.Base, g); len(v) > 0 {
		return nil, v
	}
	var vs loop.Violations
	if len(s.Points) == 0 {
		s.Points = make([]int, g.Size())
		for i := range s.Points {
			s.Points[i] = i
		}
	} else {
		s.Points = append([]int(nil), s.Points...)
		sort.Ints(s.Points)
		for k, p := range s.Points {
			if p < 0 || p >= g.Size() {
				vs = append(vs, loop.Violation{Field: fmt.Sprintf("points[%d]", k), Rule: fmt.Sprintf("must be a grid index in [0, %d), got %d", g.Size(), p)})
			} else if k > 0 && p == s.Points[k-1] {
				vs = append(vs, loop.Violation{Field: fmt.Sprintf("points[%d]", k), Rule: fmt.Sprintf("duplicate grid index %d", p)})
			}
		}
	}
	if len(vs) > 0 {
		return nil, vs
	}
	for _, i := range s.Points {
		// SweepPointScenario validates the point (multicell.Validate) and
		// names it in its violations ("at grid point i (label): …").
		if _, _, err := SweepPointScenario(s.Base, g, i, s.PerPointSeed); err != nil {
			var pv loop.Violations
			if !errors.As(err, &pv) {
				pv = loop.Violations{{Field: "axes", Rule: fmt.Sprintf("at grid point %d: %v", i, err)}}
			}
			vs = append(vs, pv...)
		}
		if len(vs) >= 100 {
			vs = append(vs, loop.Violation{Field: "axes", Rule: "more invalid grid points not listed"})
			break
		}
	}
	if len(vs) > 0 {
		return nil, vs
	}
	id, err := JobID(string(KindSweepPoint), s)
	if err != nil {
		return nil, err
	}
	return &Prepared{ID: id, Spec: s, Grid: g, Indices: s.Points}, nil
}

// JobID is the ID of a job of the given kind ("sweep_point", or a
// coordinator's own name such as "tune") over the normalised request spec:
// the hex SHA-256 (first 16 bytes) of the JSON of kind, loop.EngineVersion
// and spec, so the same request always has the same ID and a new engine
// version never reuses old results.
func JobID(kind string, spec any) (string, error) {
	b, err := json.Marshal(struct {
		Kind   string `json:"kind"`
		Engine string `json:"engine"`
		Spec   any    `json:"spec"`
	}{kind, loop.EngineVersion, spec})
	if err != nil {
		return "", fmt.Errorf("jobs: encoding the spec: %w", err)
	}
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:16]), nil
}

func prefixViolations(v loop.Violations, prefix string) loop.Violations {
	out := make(loop.Violations, len(v))
	for i, x := range v {
		out[i] = loop.Violation{Field: prefix + x.Field, Rule: x.Rule}
	}
	return out
}

// Unit is one self-contained unit of work: everything a worker needs to
// compute it, with no other lookup.
type Unit struct {
	Kind  Kind   `json:"kind"`
	Job   string `json:"job"`
	Index int    `json:"index"` // grid index (sweep) or unit index (tune)
	// Scenario is the unit's complete scenario (axis values or candidate
	// and condition applied, seed set, normalised).
	Scenario loop.Scenario `json:"scenario"`
	// Point is the sweep grid point (coordinates) or the tune candidate.
	Point tune.Point `json:"point"`
	// Tune identifies a tune replication unit (Kind KindTuneReplication).
	Tune     *TuneRef `json:"tune,omitempty"`
	Detailed bool     `json:"detailed"`
}

// TuneRef places a tune replication unit in the tuner's sequential search,
// which stays in the coordinator: only these units go through the queue.
type TuneRef struct {
	Candidate   int    `json:"candidate"`   // candidate index in the tuner's list
	Condition   string `json:"condition"`   // condition name
	Replication int    `json:"replication"` // replication number, seeds the unit
}

// ID is the unit's key: "<job>.<index>".
func (u Unit) ID() string { return fmt.Sprintf("%s.%d", u.Job, u.Index) }

// Status of a stored result.
const (
	StatusDone   = "done"
	StatusFailed = "failed"
)

// Result is a finished unit as stored in ResultBucket.
type Result struct {
	Job    string       `json:"job"`
	Index  int          `json:"index"`
	Point  tune.Point   `json:"point"`
	Seed   uint64       `json:"seed"`
	Status string       `json:"status"` // StatusDone or StatusFailed
	Error  string       `json:"error,omitempty"`
	Report *loop.Report `json:"report,omitempty"`
	// Attempts is the delivery that produced the result (1 on the first):
	// JetStream's delivery count of the unit. It counts the deliveries the
	// NATS server remembers; a server restarted while a delivery was still
	// unacknowledged may not (nats-server 2.9.10 has been seen to deliver
	// such a unit again as a first delivery), so after a server restart it
	// can be lower than the number of workers that started the unit.
	Attempts int `json:"attempts"`
	// Worker names the worker that stored the result.
	Worker string `json:"worker"`
	// NonFinite lists the report's NaN and ±Inf values (stored only;
	// decoded results have them back in Report).
	NonFinite []NonFinite `json:"non_finite,omitempty"`
}

// Deterministic returns a copy of r without the fields that depend on the
// run rather than the unit (WallTimeS, UserSlotsPerS, Attempts, Worker).
func (r Result) Deterministic() Result {
	r.Attempts, r.Worker = 0, ""
	if r.Report != nil {
		rep := *r.Report
		rep.WallTimeS, rep.UserSlotsPerS = 0, 0
		r.Report = &rep
	}
	return r
}
