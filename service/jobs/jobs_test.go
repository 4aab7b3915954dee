package jobs

import (
	"context"
	"errors"
	"fmt"
	"math"
	"reflect"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/tune"
)

// TestPointSeed checks the per-point seed rule against SplitMix64's
// reference outputs for seed 0 (Vigna, splitmix64.c: the first two outputs
// are 0xE220A8397B1DCDAF and 0x6E789E6AA1B965F4) (memory): point i's seed is
// the (i+1)-th output of the generator seeded with the base seed.
func TestPointSeed(t *testing.T) {
	for _, c := range []struct {
		seed    uint64
		i       int
		perPt   bool
		want    uint64
		comment string
	}{
		{0, 0, true, 0xE220A8397B1DCDAF, "first SplitMix64 output, seed 0"},
		{0, 1, true, 0x6E789E6AA1B965F4, "second SplitMix64 output, seed 0"},
		{12345, 5, false, 12345, "common seed"},
	} {
		if got := PointSeed(c.seed, c.i, c.perPt); got != c.want {
			t.Errorf("%s: PointSeed(%d, %d, %v) = %#x, want %#x", c.comment, c.seed, c.i, c.perPt, got, c.want)
		}
	}
}

// TestPrepare: the job ID depends only on the normalised request, and bad
// input names the field.
func TestPrepare(t *testing.T) {
	a, _ := mustPrepare(t, tinySpec(1500, 2))
	s := tinySpec(1500, 2)
	s.Axes[0].Values = nil
	s.Axes[0].First, s.Axes[0].Last, s.Axes[0].Count = 0.25, 0.5, 2 // same values as a range
	b, _ := mustPrepare(t, s)
	if a.ID != b.ID {
		t.Errorf("same grid as values and as a range: IDs %s and %s differ", a.ID, b.ID)
	}
	s = tinySpec(1500, 2)
	s.PerPointSeed = false
	c, _ := mustPrepare(t, s)
	if c.ID == a.ID {
		t.Errorf("seed mode does not change the job ID")
	}
	for _, bad := range []struct {
		mut   func(*SweepSpec)
		field string
	}{
		{func(s *SweepSpec) { s.Axes[0].Path = "inner_loop.no_such" }, "axes[0].path"},
		{func(s *SweepSpec) { s.Points = []int{0, 99} }, "points[1]"},
		{func(s *SweepSpec) { s.Points = []int{1, 1} }, "points[1]"},
		{func(s *SweepSpec) { s.Base.Run.Slots = -1 }, "base.run.slots"},
		{func(s *SweepSpec) { s.Axes[0].Values = []float64{-1} }, "axes"},
	} {
		s := tinySpec(1500, 2)
		bad.mut(&s)
		_, err := Prepare(s)
		var vs loop.Violations
		if !errors.As(err, &vs) {
			t.Errorf("want violations for %s, got %v", bad.field, err)
			continue
		}
		found := false
		for _, v := range vs {
			found = found || strings.HasPrefix(v.Field, bad.field)
		}
		if !found {
			t.Errorf("violations %v do not name %s", vs, bad.field)
		}
	}
}

// collect runs Results to completion and returns the canonical results.
func collect(t *testing.T, ctx context.Context, j *Job) map[int]Result {
	t.Helper()
	got := map[int]Result{}
	err := j.Results(ctx, func(r Result) error {
		if _, dup := got[r.Index]; dup {
			t.Errorf("result %d delivered twice", r.Index)
		}
		got[r.Index] = r
		return nil
	})
	if err != nil {
		t.Fatalf("Results: %v (%d of %d)", err, len(got), j.Units())
	}
	return got
}

func startWorker(t *testing.T, q *Queue, o WorkerOptions) (stop func()) {
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan struct{})
	go func() {
		defer close(done)
		_ = q.RunWorker(ctx, o)
	}()
	return func() { cancel(); <-done }
}

// TestQueueMatchesDirect: every point through the embedded queue with two
// concurrent workers is bit-identical to computing it directly.
func TestQueueMatchesDirect(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	e, q := embedded(t, t.TempDir(), Config{AckWait: 2 * time.Second})
	defer e.Shutdown()
	defer q.Close()
	p, us := mustPrepare(t, tinySpec(1500, 3))
	want := directResults(t, us)
	defer func(n int) { publishBatch = n }(publishBatch)
	publishBatch = 4 // two confirmation rounds for 6 units
	j, si, err := q.Submit(ctx, KindSweepPoint, us, p.Spec)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(counts(si), SubmitInfo{Units: 6, Queued: 6}) {
		t.Errorf("first submission: %+v, want 6 units all queued", si)
	}
	stop := startWorker(t, q, WorkerOptions{Concurrency: 2})
	defer stop()
	got := collect(t, ctx, j)
	if len(got) != len(want) {
		t.Fatalf("%d results, want %d", len(got), len(want))
	}
	for i, w := range want {
		if c := canon(t, got[i]); c != w {
			t.Errorf("point %d through the queue differs from the direct run:\n%s\n%s", i, c, w)
		}
	}
	st, err := q.Status(ctx, j.ID)
	if err != nil {
		t.Fatal(err)
	}
	if st.Done != 6 || st.Failed != 0 || st.Pending != 0 || st.Info.State != StateRunning {
		t.Errorf("status %+v, want 6 done", st)
	}
	// A second submission of the same request queues nothing.
	_, si, err = q.Submit(ctx, KindSweepPoint, us, p.Spec)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(counts(si), SubmitInfo{Units: 6, Done: 6}) || !slices.Equal(si.DoneIndices, []int{0, 1, 2, 3, 4, 5}) {
		t.Errorf("resubmitting a finished job: %+v, want 6 done, none queued", si)
	}
}

// TestResumeAfterSubmitterStops: the submitter and its embedded server stop
// after a few results; the same request on the same store reports those as
// done, queues only the rest, and ends with the uninterrupted run's results.
func TestResumeAfterSubmitterStops(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	dir := t.TempDir()
	p, us := mustPrepare(t, tinySpec(1500, 4))
	want := directResults(t, us)

	e, q := embedded(t, dir, Config{AckWait: 2 * time.Second})
	j, _, err := q.Submit(ctx, KindSweepPoint, us, p.Spec)
	if err != nil {
		t.Fatal(err)
	}
	stop := startWorker(t, q, WorkerOptions{})
	first := 0
	stopAfter := errors.New("submitter stops")
	err = j.Results(ctx, func(Result) error {
		first++
		if first == 3 {
			return stopAfter
		}
		return nil
	})
	if !errors.Is(err, stopAfter) {
		t.Fatalf("Results: %v", err)
	}
	stop()
	q.Close()
	e.Shutdown()

	e, q = embedded(t, dir, Config{AckWait: 2 * time.Second})
	defer e.Shutdown()
	defer q.Close()
	j, si, err := q.Submit(ctx, KindSweepPoint, us, p.Spec)
	if err != nil {
		t.Fatal(err)
	}
	if si.Done < 3 || si.Done+si.Queued != 8 || si.Retried != 0 {
		t.Errorf("resume: %+v, want at least 3 done and the rest of 8 queued", si)
	}
	t.Logf("resume found %d done, queued %d", si.Done, si.Queued)
	stop = startWorker(t, q, WorkerOptions{Concurrency: 2})
	defer stop()
	got := collect(t, ctx, j)
	for i, w := range want {
		if c := canon(t, got[i]); c != w {
			t.Errorf("point %d after the resume differs from the uninterrupted run", i)
		}
	}
}

// TestFailingUnit: a unit that always fails is tried MaxAttempts times,
// then stored as failed with its error; the job completes with the others.
// A resubmission queues the failed unit again.
func TestFailingUnit(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	e, q := embedded(t, t.TempDir(), Config{AckWait: 2 * time.Second, MaxAttempts: 2})
	defer e.Shutdown()
	defer q.Close()
	p, us := mustPrepare(t, tinySpec(1500, 2))
	var mu sync.Mutex
	tries := map[int]int{}
	run := func(ctx context.Context, u Unit) (*loop.Report, error) {
		mu.Lock()
		tries[u.Index]++
		mu.Unlock()
		if u.Index == 2 {
			return nil, fmt.Errorf("injected failure of unit %d", u.Index)
		}
		return RunUnit(ctx, u)
	}
	j, _, err := q.Submit(ctx, KindSweepPoint, us, p.Spec)
	if err != nil {
		t.Fatal(err)
	}
	stop := startWorker(t, q, WorkerOptions{run: run})
	got := collect(t, ctx, j)
	stop()
	for i := range 4 {
		r := got[i]
		switch {
		case i == 2 && (r.Status != StatusFailed || r.Error != "injected failure of unit 2" || r.Attempts != 2 || r.Report != nil):
			t.Errorf("unit 2: status %q error %q attempts %d, want failed with its error after 2 attempts", r.Status, r.Error, r.Attempts)
		case i != 2 && (r.Status != StatusDone || r.Report == nil):
			t.Errorf("unit %d: status %q, want done", i, r.Status)
		}
	}
	mu.Lock()
	if tries[2] != 2 {
		t.Errorf("failing unit ran %d times, want MaxAttempts = 2", tries[2])
	}
	mu.Unlock()
	st, err := q.Status(ctx, j.ID)
	if err != nil {
		t.Fatal(err)
	}
	if st.Done != 3 || st.Failed != 1 || st.Pending != 0 {
		t.Errorf("status %+v, want 3 done, 1 failed", st)
	}
	_, si, err := q.Submit(ctx, KindSweepPoint, us, p.Spec)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(counts(si), SubmitInfo{Units: 4, Done: 3, Retried: 1, Queued: 1}) || len(si.DoneIndices) != 3 {
		t.Errorf("resubmission: %+v, want the failed unit queued again", si)
	}
}

// TestCancel: a cancelled job's queued units are removed and its
// submitter's Results ends with ErrCancelled; a worker started afterwards
// computes nothing of it.
func TestCancel(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	e, q := embedded(t, t.TempDir(), Config{AckWait: 2 * time.Second})
	defer e.Shutdown()
	defer q.Close()
	defer func(d time.Duration) { stallAfter = d }(stallAfter)
	stallAfter = 300 * time.Millisecond
	p, us := mustPrepare(t, tinySpec(1500, 2))
	j, _, err := q.Submit(ctx, KindSweepPoint, us, p.Spec)
	if err != nil {
		t.Fatal(err)
	}
	errc := make(chan error, 1)
	go func() { errc <- j.Results(ctx, func(Result) error { return nil }) }()
	if err := q.Cancel(ctx, j.ID); err != nil {
		t.Fatal(err)
	}
	if err := <-errc; !errors.Is(err, ErrCancelled) {
		t.Errorf("Results after Cancel: %v, want ErrCancelled", err)
	}
	si, err := q.stream.Info(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if si.State.Msgs != 0 {
		t.Errorf("%d units still queued after Cancel", si.State.Msgs)
	}
	st, err := q.Status(ctx, j.ID)
	if err != nil {
		t.Fatal(err)
	}
	if st.Info.State != StateCancelled || st.Done != 0 || st.Pending != 4 {
		t.Errorf("status after cancel %+v", st)
	}
	if err := q.Cancel(ctx, "0123"); !errors.Is(err, ErrUnknownJob) {
		t.Errorf("Cancel of an unknown job: %v, want ErrUnknownJob", err)
	}
}

// TestRunTuneReplication: a coordinator's replication unit (candidate ×
// condition × replication) sent through Queue.Run gives the report of a
// direct run, and a second Run returns the stored result without
// recomputing it.
func TestRunTuneReplication(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	e, q := embedded(t, t.TempDir(), Config{AckWait: 2 * time.Second})
	defer e.Shutdown()
	defer q.Close()
	base := tinyBase(1500)
	base.Normalise()
	cand := tune.Point{Index: 1, Coords: []tune.Coord{{Path: "inner_loop.step_db", Value: 0.5}}}
	cond := tune.Condition{Name: "fast", Weight: 1, Overrides: []tune.Override{{Path: "groups[0].speeds[0].speed_kmh", Value: 120}}}
	const job = "tune-test"
	var units []Unit
	for r := range 3 {
		u, err := TuneReplicationUnit(job, 0, base, cand, 1, cond, r, tune.ReplicationSeed(9, 0, r))
		if err != nil {
			t.Fatal(err)
		}
		if u.Index, err = ScenarioIndex(u.Scenario); err != nil {
			t.Fatal(err)
		}
		units = append(units, u)
	}
	if units[0].Index == units[1].Index {
		t.Fatalf("replications 0 and 1 share the unit index %d", units[0].Index)
	}
	var runs atomic.Int32
	stop := startWorker(t, q, WorkerOptions{Concurrency: 2, run: func(ctx context.Context, u Unit) (*loop.Report, error) {
		runs.Add(1)
		return RunUnit(ctx, u)
	}})
	defer stop()
	for pass := range 2 {
		var wg sync.WaitGroup
		reps := make([]*loop.Report, len(units))
		errs := make([]error, len(units))
		for i, u := range units {
			wg.Add(1)
			go func() { defer wg.Done(); reps[i], errs[i] = q.Run(ctx, u) }()
		}
		wg.Wait()
		for i, u := range units {
			if errs[i] != nil {
				t.Fatalf("pass %d unit %d: %v", pass, i, errs[i])
			}
			want, err := RunUnit(ctx, u)
			if err != nil {
				t.Fatal(err)
			}
			if canon(t, Result{Report: reps[i]}) != canon(t, Result{Report: want}) {
				t.Errorf("pass %d: replication %d through the queue differs from the direct run", pass, i)
			}
			if got := reps[i].Seed; got != tune.ReplicationSeed(9, 0, i) {
				t.Errorf("replication %d ran with seed %d", i, got)
			}
		}
	}
	if n := runs.Load(); n != 3 {
		t.Errorf("workers ran %d units for 3 replications asked twice, want 3", n)
	}
}

// TestStoreInUse: a second embedded server on a store in use is refused
// with a clear error; after Shutdown the store can be opened again.
func TestStoreInUse(t *testing.T) {
	dir := t.TempDir()
	e, err := StartEmbedded(dir)
	if err != nil {
		t.Fatal(err)
	}
	if e2, err := StartEmbedded(dir); err == nil || !strings.Contains(err.Error(), "in use by another fadeloop process") {
		if e2 != nil {
			e2.Shutdown()
		}
		t.Errorf("second server on the same store: %v, want an in-use error", err)
	}
	e.Shutdown()
	e, err = StartEmbedded(dir)
	if err != nil {
		t.Fatalf("store after Shutdown: %v", err)
	}
	e.Shutdown()
}

// TestNonFiniteRoundTrip: NaN and ±Inf anywhere in a report survive the
// JSON storage exactly, and the stored form is valid JSON.
func TestNonFiniteRoundTrip(t *testing.T) {
	rep := &loop.Report{Seed: 3, WallTimeS: 1.5}
	rep.Aggregate.ConvergenceTimeS = loop.Estimate{Value: math.NaN(), CILow: math.Inf(-1), CIHigh: math.Inf(1)}
	rep.Users = []loop.UserFigures{{User: 0, DistanceM: 12.5}, {User: 1, DopplerHz: math.NaN()}}
	rep.Users[1].Figures.SIRErrorMeanDB.Value = 0.25
	b, err := EncodeResult(Result{Job: "j", Index: 1, Status: StatusDone, Report: rep})
	if err != nil {
		t.Fatal(err)
	}
	if !math.IsNaN(rep.Aggregate.ConvergenceTimeS.Value) || !math.IsNaN(rep.Users[1].DopplerHz) {
		t.Errorf("encoding changed the caller's report")
	}
	r, err := DecodeResult(b)
	if err != nil {
		t.Fatal(err)
	}
	g := r.Report
	switch {
	case !math.IsNaN(g.Aggregate.ConvergenceTimeS.Value), !math.IsInf(g.Aggregate.ConvergenceTimeS.CILow, -1),
		!math.IsInf(g.Aggregate.ConvergenceTimeS.CIHigh, 1), !math.IsNaN(g.Users[1].DopplerHz):
		t.Errorf("non-finite values not restored: %+v %+v", g.Aggregate.ConvergenceTimeS, g.Users[1])
	case g.Users[0].DistanceM != 12.5 || g.Users[1].Figures.SIRErrorMeanDB.Value != 0.25 || g.WallTimeS != 1.5 || g.Seed != 3:
		t.Errorf("finite values changed: %+v", g)
	case r.NonFinite != nil:
		t.Errorf("decoded result keeps NonFinite %v", r.NonFinite)
	}
}

// TestConnectKeepsExistingSetup: a client connecting with default settings
// uses the queue as it was created (ack deadline, replicas), never
// changing it.
func TestConnectKeepsExistingSetup(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	e, q := embedded(t, t.TempDir(), Config{AckWait: 2 * time.Second})
	defer e.Shutdown()
	defer q.Close()
	q2, err := Connect(ctx, e.URL(), Config{})
	if err != nil {
		t.Fatal(err)
	}
	defer q2.Close()
	if got := q2.Config().AckWait; got != 2*time.Second {
		t.Errorf("second client's ack deadline %v, want the existing 2s", got)
	}
	ci, err := q2.cons.Info(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if ci.Config.AckWait != 2*time.Second || ci.Config.MaxDeliver != -1 {
		t.Errorf("consumer changed by the second client: ack wait %v, max deliver %d", ci.Config.AckWait, ci.Config.MaxDeliver)
	}
}

// counts is si without its index list (comparable).
func counts(si SubmitInfo) SubmitInfo {
	si.DoneIndices = nil
	return si
}
