package jobs

import (
	"context"
	"fmt"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/tune"
)

// SweepPointScenario is the one place this package turns a grid index into
// a point's scenario: grid point i applied to a deep copy of base
// (tune.Point.ApplyTo), the seed set by the sweep seed rule (PointSeed) and
// normalised. base must be normalised.
//
// Merge seam: this mirrors service/simulation.go (sweepGrid.scenario and
// pointSeed); when the sweep's grid, seed and point logic move into
// loop/tune as one exported point function, point this function at it.
func SweepPointScenario(base loop.Scenario, g *tune.Grid, i int, perPointSeed bool) (loop.Scenario, tune.Point, error) {
	p := g.Point(i)
	sc, err := p.ApplyTo(base)
	if err != nil {
		return loop.Scenario{}, p, err
	}
	sc.Run.Seed = PointSeed(base.Run.Seed, i, perPointSeed)
	sc.Normalise()
	return sc, p, nil
}

// PointSeed is the seed of grid point i: seed itself (common random
// numbers) or, with perPoint, SplitMix64 (Steele, Lea & Flood 2014) of
// seed + (i+1)·0x9E3779B97F4A7C15, the rule of the Sweep RPC's
// SEED_MODE_PER_POINT.
func PointSeed(seed uint64, i int, perPoint bool) uint64 {
	if !perPoint {
		return seed
	}
	z := seed + uint64(i+1)*0x9E3779B97F4A7C15
	z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9
	z = (z ^ (z >> 27)) * 0x94D049BB133111EB
	return z ^ (z >> 31)
}

// RunUnit computes a unit with loop.Run: the report depends only on the
// unit's scenario (and loop.EngineVersion). Unless u.Detailed, the per-user
// and distance-bin figures, the normalised scenario and the traces are
// dropped. A panic in the engine becomes an error.
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
	rep, err = loop.Run(ctx, u.Scenario, loop.RunOptions{})
	if err != nil {
		return nil, err
	}
	if !u.Detailed {
		rep.Users, rep.DistanceBins, rep.NormalisedScenario, rep.Traces = nil, nil, loop.Scenario{}, nil
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
	if v := sc.Validate(); len(v) > 0 {
		return Unit{}, v
	}
	return Unit{Kind: KindTuneReplication, Job: job, Index: index, Scenario: sc, Point: cand,
		Tune: &TuneRef{Candidate: candIndex, Condition: cond.Name, Replication: replication}}, nil
}
