package jobs

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"sync/atomic"
	"testing"
	"time"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/tune"
)

// TestTuneThroughQueueResumes: a tune whose replications run as units on
// the queue (ReplicationRunner as tune.Options.RunReplication) is
// interrupted after some replications are stored; the same search run
// again on the same store computes only the replications not stored yet
// (every replication computed once over both runs) and gives the
// recommendation of the in-process search bit for bit (each replication's
// report depends only on its scenario, DESIGN.md "Determinism").
func TestTuneThroughQueueResumes(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	req := tune.Request{
		Base:      tinyBase(1500),
		Axes:      []tune.Axis{{Path: "inner_loop.step_db", Values: []float64{0.5, 1, 2}}},
		Objective: tune.Objective{Kind: tune.ObjectiveMinSIRErrorStd},
		Conditions: []tune.Condition{
			{Name: "ped", Weight: 1, Overrides: []tune.Override{{Path: "groups[0].speeds[0].speed_kmh", Value: 3}}},
			{Name: "car", Weight: 1, Overrides: []tune.Override{{Path: "groups[0].speeds[0].speed_kmh", Value: 60}}},
		},
		Budget: tune.Budget{MinReplications: 2, MaxReplications: 6},
	}
	want, err := tune.Tune(ctx, req, tune.Options{})
	if err != nil {
		t.Fatal(err)
	}
	job, err := JobID("tune", req)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	var computed atomic.Int64
	counting := WorkerOptions{run: func(ctx context.Context, u Unit) (*loop.Report, error) {
		rep, err := RunUnit(ctx, u)
		if err == nil && ctx.Err() == nil {
			computed.Add(1)
		}
		return rep, err
	}}

	// First run: stopped once 5 replications have come back.
	const stopAfter = 5
	e, q := embedded(t, dir, Config{})
	stop := startWorker(t, q, counting)
	tctx, tcancel := context.WithCancel(ctx)
	var back atomic.Int64
	run := q.ReplicationRunner(job)
	_, err = tune.Tune(tctx, req, tune.Options{Parallelism: 3, RunReplication: func(c context.Context, sc loop.Scenario) (*loop.Report, error) {
		rep, err := run(c, sc)
		if err == nil && back.Add(1) == stopAfter {
			tcancel()
		}
		return rep, err
	}})
	tcancel()
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("interrupted search: %v, want context.Canceled", err)
	}
	stop()
	first, failed, err := q.StoredCount(ctx, job)
	if err != nil || failed != 0 || first < stopAfter {
		t.Fatalf("after the interrupt: %d stored, %d failed (%v); want ≥ %d", first, failed, err, stopAfter)
	}
	q.Close()
	e.Shutdown()

	// Second run on the same store: resumes.
	e, q = embedded(t, dir, Config{})
	defer e.Shutdown()
	defer q.Close()
	computed.Store(0)
	stop = startWorker(t, q, counting) // one unit at a time: none computed twice
	got, err := tune.Tune(ctx, req, tune.Options{Parallelism: 3, RunReplication: q.ReplicationRunner(job)})
	stop()
	if err != nil {
		t.Fatal(err)
	}
	a, _ := json.Marshal(want)
	b, _ := json.Marshal(got)
	if !bytes.Equal(a, b) {
		t.Errorf("resumed search through the queue differs from the in-process one:\n%s\n%s", a, b)
	}
	all, _, err := q.StoredCount(ctx, job)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("replications stored: %d after the interrupt, %d in all; the resumed run computed %d", first, all, computed.Load())
	if n := computed.Load(); int(n) != all-first || n == 0 || int(n) >= all {
		t.Errorf("resumed run computed %d replications; %d were stored before, %d after: want exactly the %d missing",
			n, first, all, all-first)
	}
}
