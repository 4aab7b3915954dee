package jobs

import (
	"context"
	"testing"
	"time"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/tune"
)

// tinyBase is a small, fast scenario: the canonical cell with 4 users and
// slots short enough for many points per test.
func tinyBase(slots int64) loop.Scenario {
	sc := loop.CanonicalScenario()
	sc.Name = "tiny"
	sc.Groups[0].Count = 4
	sc.Run.Slots = slots
	sc.Run.WarmupSlots = 150
	sc.Run.Seed = 7
	return sc
}

// tinySpec is a per-point-seeded sweep of step size × update rate.
func tinySpec(slots int64, steps int) SweepSpec {
	vals := []float64{0.25, 0.5, 0.75, 1, 1.25, 1.5, 1.75, 2, 2.25, 2.5, 2.75, 3}[:steps]
	return SweepSpec{
		Base: tinyBase(slots),
		Axes: []tune.Axis{
			{Path: "inner_loop.step_db", Values: vals},
			{Path: "inner_loop.update_rate_hz", Values: []float64{750, 1500}},
		},
		PerPointSeed: true,
	}
}

func mustPrepare(t testing.TB, s SweepSpec) (*Prepared, []Unit) {
	t.Helper()
	p, err := Prepare(s)
	if err != nil {
		t.Fatal(err)
	}
	us, err := SweepUnits(p)
	if err != nil {
		t.Fatal(err)
	}
	return p, us
}

// embedded starts an embedded server on a temporary store and connects.
func embedded(t testing.TB, dir string, cfg Config) (*Embedded, *Queue) {
	t.Helper()
	e, err := StartEmbedded(dir)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	q, err := Connect(ctx, e.URL(), cfg)
	if err != nil {
		e.Shutdown()
		t.Fatal(err)
	}
	return e, q
}

// directResults computes every unit in this process with RunUnit, as the
// stored, JSON-decoded results would read (deterministic fields only).
func directResults(t testing.TB, us []Unit) map[int]string {
	t.Helper()
	out := map[int]string{}
	for _, u := range us {
		rep, err := RunUnit(context.Background(), u)
		if err != nil {
			t.Fatal(err)
		}
		out[u.Index] = canon(t, Result{Job: u.Job, Index: u.Index, Point: u.Point, Seed: u.Scenario.Run.Seed, Status: StatusDone, Report: rep})
	}
	return out
}

// canon is the JSON of r's deterministic fields after a JSON round trip.
func canon(t testing.TB, r Result) string {
	t.Helper()
	b, err := EncodeResult(r.Deterministic())
	if err != nil {
		t.Fatal(err)
	}
	back, err := DecodeResult(b)
	if err != nil {
		t.Fatal(err)
	}
	b2, err := EncodeResult(back)
	if err != nil {
		t.Fatal(err)
	}
	return string(b2)
}
