package tune

import (
	"errors"
	"fmt"
	"math"
	"math/bits"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
)

// RunOverheadTapSlots is the fixed cost of one engine run (building,
// normalising and validating its scenario, setting up the channels and
// collecting the report) in tap-slots, the unit of loop.Scenario.Cost.
// Measured: a one-user, 40-slot run took 2.3 ms while long runs simulated
// 1.96e7 tap-slots/s on the same 2-core machine, so the fixed part is worth
// about 45 000 tap-slots; rounded up. It makes a grid of many tiny points
// cost what it takes to run (wall time and memory), not what its slots
// alone would suggest.
const RunOverheadTapSlots = 50000

// Cost bounds the work of a Sweep, Tune or Capacity request, computed
// from the base scenario and the axis values without building the grid.
type Cost struct {
	// TapSlots bounds the simulated work plus RunOverheadTapSlots per run,
	// saturating at math.MaxInt64.
	TapSlots int64 `json:"tap_slots"`
	// Runs bounds the engine runs (replications) of the request.
	Runs int64 `json:"runs"`
	// Points is the number of grid points (sweep) or candidates (tune).
	Points int64 `json:"points"`
}

// probeAxes returns the coordinates of the heaviest point of g over base
// (Index -1: it need not be one grid point): for every axis the
// value whose scenario (base with that value alone, normalised) costs most
// in loop.Scenario.Cost. The cost of every point of the grid is at most the
// cost of the heaviest point: Cost is Σ_groups count·taps × slots ×
// replications, a product of non-negative sums in which each axis sets one
// term, so each axis' cost-maximising value does not depend on the other
// axes. It takes one probe per axis value (the sum of the axis lengths,
// never their product). With validate, a value that makes the base invalid
// is reported at "axes[a].values[k]" ("axes[a].names[k]").
func probeAxes(base loop.Scenario, g *Grid, validate bool) (Point, loop.Violations) {
	var v loop.Violations
	heavy := Point{Index: -1}
	for a := range g.Axes {
		best, bestCost := -1, int64(-1)
		field := "values"
		if g.values[a] == nil {
			field = "names"
		}
		for k := range g.axisLen(a) {
			c := g.coord(a, k)
			sc := base.Clone()
			if err := c.apply(&sc); err != nil {
				v = append(v, loop.Violation{Field: fmt.Sprintf("axes[%d].%s[%d]", a, field, k), Rule: err.Error()})
				continue
			}
			sc.Normalise()
			if validate {
				for _, x := range multicell.Validate(sc) {
					v = append(v, loop.Violation{Field: fmt.Sprintf("axes[%d].%s[%d]", a, field, k),
						Rule: fmt.Sprintf("%s = %s makes %s invalid: %s", g.Axes[a].Path, c.valueText(), x.Field, x.Rule)})
				}
				if len(v) >= MaxSweepViolations {
					return heavy, v
				}
			}
			if cost := sc.Cost(); cost > bestCost {
				best, bestCost = k, cost
			}
		}
		if best >= 0 {
			heavy.Coords = append(heavy.Coords, g.coord(a, best))
		}
	}
	return heavy, v
}

// CheckAxes reports every axis value of g that makes base invalid on its
// own (base with that one value set, normalised, checked by
// multicell.Validate), at "axes[a].values[k]" ("axes[a].names[k]") with a
// rule naming the value and the field it breaks, as PlanSweep and
// PlanTune do; at most MaxSweepViolations of them.
func CheckAxes(base loop.Scenario, g *Grid) loop.Violations {
	_, v := probeAxes(base, g, true)
	return capViolations(v)
}

// CapacityCost bounds the work of Capacity(req) in tap-slots without
// running it. The doubling evaluates counts lo, 2·lo, ... up to hi (the
// group's largest count: max_count, or the engine's user limit), together
// at most 2·hi users of the group; the bisection at most ⌈log₂ hi⌉ + 1 more
// counts, each at most hi; every evaluation also runs the other groups'
// users. Each count costs replications runs (default 4) of the base's
// slots, times the most taps of any user; with max_user_slots set, at most
// that many user-slots are simulated. Every run adds RunOverheadTapSlots.
// An out-of-range group gives a zero cost (Capacity rejects it).
func CapacityCost(req CapacityRequest) Cost {
	base := req.Base.Clone()
	base.Normalise()
	if req.Group < 0 || req.Group >= len(base.Groups) {
		return Cost{}
	}
	cells := int64(base.Layout.Cells()) // multi-cell: counts are per cell
	others := int64(base.Users())/cells - int64(max(base.Groups[req.Group].Count, 0))
	hi := req.MaxCount
	if hi <= 0 {
		hi = capacityTop(base, int(others))
	}
	hi = max(hi, 1)
	reps := int64(req.Replications)
	if reps <= 0 {
		reps = 4
	}
	steps := int64(2 * (bits.Len(uint(hi)) + 1))
	users := (2*int64(hi) + int64(bits.Len(uint(hi))+1)*int64(hi) + steps*others) * cells
	us := satMul(satMul(users, reps), base.TotalSlots())
	if req.MaxUserSlots > 0 && req.MaxUserSlots < us {
		us = req.MaxUserSlots
	}
	taps := tapsPerUser(base)
	runs := satMul(steps, reps)
	return Cost{Runs: runs, TapSlots: satAdd(satMul(us, taps), satMul(runs, RunOverheadTapSlots))}
}

// capacitySettings are a checked capacity request's resolved settings.
type capacitySettings struct {
	base                      loop.Scenario // normalised, run.replications 1
	others, top, lo, hi, reps int
	conf                      float64
	nrLim                     float64 // noise-rise limit, dB
}

// check validates req as Capacity does (every rule, the base scenario at
// the lowest count), without running anything.
func (req CapacityRequest) check() (capacitySettings, loop.Violations) {
	var set capacitySettings
	var v loop.Violations
	add := func(f, format string, args ...any) {
		v = append(v, loop.Violation{Field: f, Rule: fmt.Sprintf(format, args...)})
	}
	base := req.Base.Clone()
	base.Normalise()
	if req.Group < 0 || req.Group >= len(base.Groups) {
		add("group", "must index a group of the base scenario (0..%d), got %d", len(base.Groups)-1, req.Group)
		return set, v
	}
	if base.Groups[req.Group].Placement == loop.PlacementExplicit {
		add("group", "group %d has explicit distances; the capacity search needs a uniform placement to scale its count", req.Group)
	}
	if !(req.OutageLimit > 0 && req.OutageLimit < 1) {
		add("outage_limit", "must be in (0, 1), got %g", req.OutageLimit)
	}
	nrLim := req.NoiseRiseLimitDB
	if nrLim == 0 {
		nrLim = DefaultNoiseRiseLimitDB
	}
	if !(nrLim > 0 && nrLim <= 40) {
		add("noise_rise_limit_db", "must be in [0, 40] dB (0: the default %g dB), got %g", DefaultNoiseRiseLimitDB, req.NoiseRiseLimitDB)
	}
	// In multi-cell mode counts are per cell: others and top are per cell.
	others := base.Users()/base.Layout.Cells() - max(base.Groups[req.Group].Count, 0)
	top := capacityTop(base, others)
	lo, hi := req.MinCount, req.MaxCount
	if lo == 0 {
		lo = 1
	}
	if lo < 1 || lo > top {
		add("min_count", "must be in [1, %d], got %d", top, req.MinCount)
	}
	if hi != 0 && (hi < lo || hi > top) {
		add("max_count", "must be in [min_count, %d] or 0, got %d", top, req.MaxCount)
	}
	reps := req.Replications
	if reps == 0 {
		reps = 4
	}
	if reps < 1 || reps > 1000 {
		add("replications", "must be in [1, 1000], got %d", req.Replications)
	}
	conf := req.Confidence
	if conf == 0 {
		conf = DefaultConfidence
	}
	if !(conf >= 0.5 && conf <= 0.9999) {
		add("confidence", "must be in [0.5, 0.9999], got %g", req.Confidence)
	}
	if req.MaxUserSlots < 0 {
		add("max_user_slots", "must be >= 0, got %d", req.MaxUserSlots)
	}
	if len(v) > 0 {
		return set, v
	}
	base.Run.Replications = 1
	probe := base.Clone()
	probe.Groups[req.Group].Count = lo
	if vv := multicell.Validate(probe); len(vv) > 0 {
		return set, vv
	}
	set = capacitySettings{base: base, others: others, top: top, lo: lo, hi: hi, reps: reps, conf: conf, nrLim: nrLim}
	return set, nil
}

// CheckCapacity validates req as Capacity does, without running it: the
// group, outage limit, count range, replications, confidence, budget and
// the base scenario at the lowest count. Bad input returns
// loop.Violations naming request fields.
func CheckCapacity(req CapacityRequest) error {
	_, err := PlanCapacity(req)
	return err
}

// CapacityPlan is a checked capacity request: its resolved settings and
// the bound on its work. Run answers it.
type CapacityPlan struct {
	req  CapacityRequest
	set  capacitySettings
	cost Cost
}

// PlanCapacity validates req as CheckCapacity does and bounds its work
// (CapacityCost), running nothing.
func PlanCapacity(req CapacityRequest) (*CapacityPlan, error) {
	set, v := req.check()
	if len(v) > 0 {
		return nil, v
	}
	return &CapacityPlan{req: req, set: set, cost: CapacityCost(req)}, nil
}

// Cost is the bound on the plan's work (CapacityCost).
func (plan *CapacityPlan) Cost() Cost { return plan.cost }

// tapsPerUser is the most fading taps of one user of sc (at least 1), the
// factor from user-slots to tap-slots in loop.Scenario.Cost.
func tapsPerUser(sc loop.Scenario) int64 {
	taps := int64(1)
	for _, g := range sc.Groups {
		one := loop.Scenario{Groups: []loop.UserGroup{g}, Run: loop.RunSettings{Slots: 1, Replications: 1}}
		one.Groups[0].Count = 1
		taps = max(taps, one.Cost())
	}
	if sc.MultiCell() {
		// Each user fades on up to max_active legs.
		legs := sc.Layout.Handover.MaxActive
		if legs <= 0 {
			legs = loop.DefaultMaxActive
		}
		taps *= int64(legs)
	}
	return taps
}

// prefixed returns v with prefix before every field path.
func prefixed(prefix string, v loop.Violations) loop.Violations {
	out := make(loop.Violations, len(v))
	for i, x := range v {
		out[i] = loop.Violation{Field: prefix + x.Field, Rule: x.Rule}
	}
	return out
}

// asViolations returns the loop.Violations err carries, or err as one
// violation at "axes".
func asViolations(err error) loop.Violations {
	var v loop.Violations
	if errors.As(err, &v) {
		return v
	}
	return loop.Violations{{Field: "axes", Rule: err.Error()}}
}

// capViolations keeps the first MaxSweepViolations of v and one more
// entry counting the rest.
func capViolations(v loop.Violations) loop.Violations {
	if len(v) <= MaxSweepViolations {
		return v
	}
	rest := len(v) - MaxSweepViolations
	return append(v[:MaxSweepViolations:MaxSweepViolations], loop.Violation{Field: "axes", Rule: fmt.Sprintf("and %d more violations not listed", rest)})
}

func sat(x float64) int64 {
	if x >= math.MaxInt64 {
		return math.MaxInt64
	}
	return int64(x)
}

func satMul(a, b int64) int64 {
	if a <= 0 || b <= 0 {
		return 0
	}
	if a > math.MaxInt64/b {
		return math.MaxInt64
	}
	return a * b
}

func satAdd(a, b int64) int64 {
	if a > math.MaxInt64-b {
		return math.MaxInt64
	}
	return a + b
}

// capacityTop is the largest count of the scaled group: the engine's user
// limit less the other groups' users, per cell in multi-cell mode (also
// within the multi-cell engine's per-cell and layout limits).
func capacityTop(base loop.Scenario, others int) int {
	if base.MultiCell() {
		return min(multicell.MaxGroupSize, multicell.MaxUsers/base.Layout.Cells()-others)
	}
	return loop.MaxUsers - others
}
