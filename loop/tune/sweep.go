package tune

import (
	"context"
	"fmt"
	"time"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
)

// MaxSweepViolations caps the violations one sweep check collects; the
// check stops at the cap.
const MaxSweepViolations = 50

// SweepRequest is a grid of scenarios to run: the base with the axis values
// of each point set (grid order, see Point), every point with the seed
// PointSeed(base run.seed, index, SeedMode) and the base's replications.
// Violations name request fields: "base.<scenario path>", "axes[i]...",
// "point_indices[i]", "seed_mode".
type SweepRequest struct {
	// Base is the scenario every point starts from.
	Base loop.Scenario `json:"base"`
	// Axes span the grid, 1 to MaxAxes; listed values may repeat.
	Axes []Axis `json:"axes"`
	// Indices are the grid indices to compute, distinct, in the order given;
	// empty means every point in grid order.
	Indices []int64 `json:"point_indices"`
	// SeedMode is SeedModeCommon or SeedModePerPoint.
	SeedMode SeedMode `json:"seed_mode"`
}

// SweepPlan is a checked sweep: its grid, the points to compute and the
// bound on its work (Cost), all found without building a point's scenario
// beyond one probe per axis value.
type SweepPlan struct {
	base    loop.Scenario // normalised
	grid    *Grid
	indices []int64 // nil: every point
	mode    SeedMode
	cost    Cost
}

// PlanSweep checks req without expanding the grid: the base scenario, each
// axis, each axis value alone on the base (a value that makes the base
// invalid is reported at "axes[a].values[k]" or "axes[a].names[k]"), the
// point indices and the seed mode; and bounds its cost (SweepCost). Its
// memory and time grow with the sum of the axis lengths and the number of
// indices, never with the grid size. Violations are capped at
// MaxSweepViolations.
func PlanSweep(req SweepRequest) (*SweepPlan, error) {
	base := req.Base.Clone()
	base.Normalise()
	if v := multicell.Validate(base); len(v) > 0 {
		return nil, prefixed("base.", v)
	}
	var v loop.Violations
	if req.SeedMode != SeedModeCommon && req.SeedMode != SeedModePerPoint {
		v = append(v, loop.Violation{Field: "seed_mode", Rule: fmt.Sprintf("must be SEED_MODE_COMMON (1) or SEED_MODE_PER_POINT (2), got %d", req.SeedMode)})
	}
	if len(req.Axes) == 0 {
		v = append(v, loop.Violation{Field: "axes", Rule: fmt.Sprintf("must list 1 to %d axes", MaxAxes)})
		return nil, v
	}
	g, err := newGrid(base, req.Axes, false)
	if err != nil {
		return nil, append(v, asViolations(err)...)
	}
	heavy, pv := probeAxes(base, g, true)
	if v = append(v, pv...); len(v) > 0 {
		return nil, capViolations(v)
	}
	if len(req.Indices) > MaxGridPoints {
		v = append(v, loop.Violation{Field: "point_indices", Rule: fmt.Sprintf("at most %d indices, got %d", MaxGridPoints, len(req.Indices))})
		return nil, v
	}
	seen := make(map[int64]bool, len(req.Indices))
	for i, p := range req.Indices {
		switch {
		case p < 0 || p >= int64(g.Size()):
			v = append(v, loop.Violation{Field: fmt.Sprintf("point_indices[%d]", i), Rule: fmt.Sprintf("must be a grid index in [0, %d), got %d", g.Size(), p)})
		case seen[p]:
			v = append(v, loop.Violation{Field: fmt.Sprintf("point_indices[%d]", i), Rule: fmt.Sprintf("duplicate index %d", p)})
		}
		seen[p] = true
		if len(v) > MaxSweepViolations {
			break
		}
	}
	if len(v) > 0 {
		return nil, capViolations(v)
	}
	plan := &SweepPlan{base: base, grid: g, mode: req.SeedMode}
	if len(req.Indices) > 0 {
		plan.indices = append([]int64(nil), req.Indices...)
	}
	points := int64(plan.Points())
	run, _ := heavy.ApplyTo(base)
	run.Normalise()
	plan.cost = Cost{Points: points, Runs: points, TapSlots: satAdd(satMul(points, run.Cost()),
		satMul(points, satMul(int64(max(run.Run.Replications, 1)), RunOverheadTapSlots)))}
	return plan, nil
}

// Points is the number of points the plan computes.
func (p *SweepPlan) Points() int {
	if p.indices != nil {
		return len(p.indices)
	}
	return p.grid.Size()
}

// GridSize is the number of points of the whole grid.
func (p *SweepPlan) GridSize() int { return p.grid.Size() }

// Cost is the bound on the plan's work (see SweepCost).
func (p *SweepPlan) Cost() Cost { return p.cost }

// index is the grid index of the plan's i-th point.
func (p *SweepPlan) index(i int) int64 {
	if p.indices != nil {
		return p.indices[i]
	}
	return int64(i)
}

// Check builds and validates the scenario of every point to compute, under
// ctx (it returns ctx.Err() once ctx is done), stopping after
// MaxSweepViolations violations. Run it after admission: its time grows
// with the number of points. A violation of a combination of axis values
// is reported at "axes" with the point's index and label.
func (p *SweepPlan) Check(ctx context.Context) error {
	var v loop.Violations
	for i := range p.Points() {
		if i%256 == 0 {
			if err := ctx.Err(); err != nil {
				return err
			}
		}
		if _, err := p.scenario(p.index(i)); err != nil {
			v = append(v, asViolations(err)...)
			if len(v) >= MaxSweepViolations {
				break
			}
		}
	}
	return capViolations(v).Err()
}

// scenario is the normalised, validated scenario of grid point idx.
func (p *SweepPlan) scenario(idx int64) (loop.Scenario, error) {
	return pointScenario(p.base, p.grid, idx, p.mode)
}

// pointScenario builds grid point idx of g on base (normalised): the axis
// values set, run.seed = PointSeed, normalised and validated.
func pointScenario(base loop.Scenario, g *Grid, idx int64, mode SeedMode) (loop.Scenario, error) {
	return PointScenario(base, g, idx, mode)
}

// PointScenario is the one home of a sweep point's scenario: grid point idx
// of g applied to a copy of base (normalised), run.seed = PointSeed(base
// run.seed, idx, mode), normalised and validated. RunPoint runs it; the
// durable queue (service/jobs) ships it to its workers. Violations name the
// grid point.
func PointScenario(base loop.Scenario, g *Grid, idx int64, mode SeedMode) (loop.Scenario, error) {
	pt := g.Point(int(idx))
	sc, err := pt.ApplyTo(base)
	if err != nil {
		return loop.Scenario{}, loop.Violations{{Field: "axes", Rule: fmt.Sprintf("at grid point %d (%s): %v", idx, pt.Label(), err)}}
	}
	sc.Run.Seed = PointSeed(base.Run.Seed, idx, mode)
	sc.Normalise()
	if vs := multicell.Validate(sc); len(vs) > 0 {
		out := make(loop.Violations, len(vs))
		for i, x := range vs {
			out[i] = loop.Violation{Field: "axes", Rule: fmt.Sprintf("at grid point %d (%s): %s: %s", idx, pt.Label(), x.Field, x.Rule)}
		}
		return loop.Scenario{}, out
	}
	return sc, nil
}

// SweepPoint is one computed grid point.
type SweepPoint struct {
	// Index is the grid index.
	Index int64 `json:"index"`
	// Point holds the point's coordinates, one per axis.
	Point Point `json:"point"`
	// Seed is the run.seed the point ran with.
	Seed uint64 `json:"seed"`
	// Report is the engine's report of the point.
	Report *loop.Report `json:"report"`
}

// RunPoint computes grid point index of the grid of axes over base with
// seedMode: it checks base and axes as PlanSweep does (without the cost),
// builds the point's scenario (base with the axis values set, run.seed =
// PointSeed(base run.seed, index, seedMode), normalised), validates it and
// runs it with loop.Run. The result depends only on (base, axes, index,
// seedMode): identical whatever process, worker, core count or retry
// computes it. Bad input returns loop.Violations; a cancelled ctx returns
// ctx.Err(); a panic in the engine returns a *loop.PanicError.
func RunPoint(ctx context.Context, base loop.Scenario, axes []Axis, index int64, seedMode SeedMode) (*SweepPoint, error) {
	b := base.Clone()
	b.Normalise()
	if v := multicell.Validate(b); len(v) > 0 {
		return nil, prefixed("base.", v)
	}
	if seedMode != SeedModeCommon && seedMode != SeedModePerPoint {
		return nil, loop.Violations{{Field: "seed_mode", Rule: fmt.Sprintf("must be SEED_MODE_COMMON (1) or SEED_MODE_PER_POINT (2), got %d", seedMode)}}
	}
	g, err := newGrid(b, axes, false)
	if err != nil {
		return nil, err
	}
	if index < 0 || index >= int64(g.Size()) {
		return nil, loop.Violations{{Field: "point_indices", Rule: fmt.Sprintf("must be a grid index in [0, %d), got %d", g.Size(), index)}}
	}
	return safeCall(ctx, 0, func(ctx context.Context, _ int) (*SweepPoint, error) {
		return runPoint(ctx, b, g, index, seedMode)
	})
}

// runPoint runs grid point idx; its callers turn an engine panic into a
// *loop.PanicError (safeCall, runPool).
func runPoint(ctx context.Context, base loop.Scenario, g *Grid, idx int64, mode SeedMode) (*SweepPoint, error) {
	sc, err := pointScenario(base, g, idx, mode)
	if err != nil {
		return nil, err
	}
	rep, err := multicell.RunScenario(ctx, sc, loop.RunOptions{}) // single- or multi-cell engine
	if err != nil {
		return nil, err
	}
	return &SweepPoint{Index: idx, Point: g.Point(int(idx)), Seed: sc.Run.Seed, Report: rep}, nil
}

// SweepOptions are the call-time settings of Sweep that do not change any
// point's result.
type SweepOptions struct {
	// Parallelism is the most points in flight; 0 means GOMAXPROCS.
	Parallelism int
	// Check, when set, runs plan.Check before the first point.
	Check bool
}

// SweepSummary is the effort of a finished sweep.
type SweepSummary struct {
	GridPoints int64 `json:"grid_points"`
	// PointsStarted counts the points whose run started; after a cancel
	// no point starts, so it exceeds PointsComputed by at most the points
	// that were running.
	PointsStarted  int64         `json:"points_started"`
	PointsComputed int64         `json:"points_computed"`
	UserSlots      int64         `json:"simulated_user_slots"`
	Wall           time.Duration `json:"-"`
}

// Sweep computes the plan's points on the package's worker pool (runPool)
// of opt.Parallelism workers and hands each finished point to onPoint,
// serialised, in completion order (each point's content is deterministic,
// its arrival order is not). The first error (a point's, onPoint's or
// ctx's) stops the workers: no new point starts, running points see a
// cancelled context, and Sweep returns that error, with the summary of the
// work done, once every worker has stopped.
func Sweep(ctx context.Context, plan *SweepPlan, opt SweepOptions, onPoint func(*SweepPoint) error) (SweepSummary, error) {
	start := time.Now()
	sum := SweepSummary{GridPoints: int64(plan.GridSize())}
	if opt.Check {
		if err := plan.Check(ctx); err != nil {
			return sum, err
		}
	}
	st, err := runPool(ctx, plan.Points(), opt.Parallelism,
		func(ctx context.Context, i int) (*SweepPoint, error) {
			return runPoint(ctx, plan.base, plan.grid, plan.index(i), plan.mode)
		},
		func(_ int, sp *SweepPoint) error {
			if err := onPoint(sp); err != nil {
				return err
			}
			sum.UserSlots += sp.Report.SimulatedUserSlots
			return nil
		})
	sum.PointsStarted, sum.PointsComputed = int64(st.Started), int64(st.Finished)
	sum.Wall = time.Since(start)
	return sum, err
}
