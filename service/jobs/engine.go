package jobs

import (
	"context"
	"fmt"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
	"github.com/fadeloop/fadeloop/loop/tune"
)

// SweepPointScenario turns grid index i into the point's scenario with
// tune.PointScenario (the one home of the sweep point and its seed rule,
// shared with the Sweep RPC); it returns the point too. base must be
// normalised.
func SweepPointScenario(base loop.Scenario, g *tune.Grid, i int, perPointSeed bool) (loop.Scenario, tune.Point, error) {
	sc, err := tune.PointScenario(base, g, int64(i), seedMode(perPointSeed))
	return sc, g.Point(i), err
}

// PointSeed is the seed of grid point i under the sweep seed rule
// (tune.PointSeed): the base seed, or SplitMix64 of it per point.
func PointSeed(seed uint64, i int, perPoint bool) uint64 {
	return tune.PointSeed(seed, int64(i), seedMode(perPoint))
}

// seedMode maps the spec's per-point flag to the sweep seed mode.
func seedMode(perPoint bool) tune.SeedMode {
	if perPoint {
		return tune.SeedModePerPoint
	}
	return tune.SeedModeCommon
}

// RunUnit computes a unit with multicell.RunScenario (the single- or
// multi-cell engine, as the direct Sweep, Tune and Capacity calls run it):
// the report depends only on the unit's scenario (and loop.EngineVersion).
// Unless u.Detailed, the per-user and distance-bin figures, the normalised
// scenario, the traces and the multi-cell per-user points are dropped. A
// panic in the engine becomes an error.
func RunUnit(ctx context.Context, u Unit) (rep *loop.Report, err error) {
	defer func() {
		if v := recover(); v != nil {
			rep, err = nil, loop.NewPanicError(v)
		}
	}()
	switch u.Kind {
	case KindSweepPoint, KindTuneReplication:
	default:
		return nil, fmt.Errorf("unknown unit kind %q", u.Kind)
	}
	rep, err = multicell.RunScenario(ctx, u.Scenario, loop.RunOptions{})
	if err != nil {
		return nil, err
	}
	if !u.Detailed {
		rep.Users, rep.DistanceBins, rep.NormalisedScenario, rep.Traces = nil, nil, loop.Scenario{}, nil
		if rep.Layout != nil {
			rep.Layout.UserPoints = nil
		}
	}
	return rep, nil
}

// SweepUnits returns the units of a prepared sweep, in index order.
func SweepUnits(p *Prepared) ([]Unit, error) {
	out := make([]Unit, 0, len(p.Indices))
	for _, i := range p.Indices {
		sc, pt, err := SweepPointScenario(p.Spec.Base, p.Grid, i, p.Spec.PerPointSeed)
		if err != nil {
			return nil, fmt.Errorf("grid point %d: %w", i, err)
		}
		out = append(out, Unit{Kind: KindSweepPoint, Job: p.ID, Index: i, Scenario: sc, Point: pt, Detailed: p.Spec.Detailed})
	}
	return out, nil
}

// TuneReplicationUnit builds the unit of one tune replication: candidate
// point applied to base, then the condition's overrides, seeded with seed
// (the coordinator's replication seed). index must be unique in the job.
func TuneReplicationUnit(job string, index int, base loop.Scenario, cand tune.Point, candIndex int, cond tune.Condition, replication int, seed uint64) (Unit, error) {
	sc, err := cand.ApplyTo(base)
	if err != nil {
		return Unit{}, err
	}
	if err := cond.Apply(&sc); err != nil {
		return Unit{}, err
	}
	sc.Run.Seed = seed
	sc.Normalise()
	if v := multicell.Validate(sc); len(v) > 0 {
		return Unit{}, v
	}
	return Unit{Kind: KindTuneReplication, Job: job, Index: index, Scenario: sc, Point: cand,
		Tune: &TuneRef{Candidate: candIndex, Condition: cond.Name, Replication: replication}}, nil
}
