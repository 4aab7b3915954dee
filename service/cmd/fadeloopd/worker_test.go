package main

import (
	"bytes"
	"context"
	"strings"
	"testing"
	"time"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/tune"
	"github.com/fadeloop/fadeloop/service/jobs"
)

func TestWorkerFlags(t *testing.T) {
	for _, c := range []struct {
		args []string
		want string // error substring; "" for success
	}{
		{nil, "-queue must be a nats://"},
		{[]string{"-queue", "localhost:4222"}, "-queue must be a nats://"},
		{[]string{"-queue", "nats://127.0.0.1:4222", "-concurrency", "0"}, "-concurrency must be in [1, 256]"},
		{[]string{"-queue", "nats://127.0.0.1:4222", "extra"}, "unexpected arguments: extra"},
		{[]string{"--queue", "nats://127.0.0.1:4222", "--concurrency", "2"}, ""},
	} {
		_, err := parseWorkerFlags(c.args, &bytes.Buffer{})
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%v: %v", c.args, err)
		case c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)):
			t.Errorf("%v: error %v, want %q", c.args, err, c.want)
		}
	}
}

// TestRunDispatchesWorker: `fadeloopd worker ...` reaches the worker's flags.
func TestRunDispatchesWorker(t *testing.T) {
	err := run([]string{"worker", "-queue", "127.0.0.1:4222"}, &bytes.Buffer{})
	if err == nil || !strings.Contains(err.Error(), "worker: -queue must be a nats://") {
		t.Errorf("run(worker ...): %v, want the worker's -queue error", err)
	}
}

// TestWorkerSubcommand: `fadeloopd worker --queue URL` computes a queued
// sweep, through the same dispatch as the command line.
func TestWorkerSubcommand(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	e, err := jobs.StartEmbedded(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	defer e.Shutdown()
	q, err := jobs.Connect(ctx, e.URL(), jobs.Config{})
	if err != nil {
		t.Fatal(err)
	}
	defer q.Close()
	sc := loop.CanonicalScenario()
	sc.Groups[0].Count = 2
	sc.Run.Slots, sc.Run.WarmupSlots = 1500, 150
	p, err := jobs.Prepare(jobs.SweepSpec{Base: sc, Axes: []tune.Axis{{Path: "inner_loop.step_db", Values: []float64{0.5, 1}}}})
	if err != nil {
		t.Fatal(err)
	}
	us, _ := jobs.SweepUnits(p)
	j, _, err := q.Submit(ctx, jobs.KindSweepPoint, us, p.Spec)
	if err != nil {
		t.Fatal(err)
	}
	wctx, stop := context.WithCancel(ctx)
	var logs bytes.Buffer
	done := make(chan error, 1)
	go func() {
		done <- runWorkerCtx(wctx, []string{"--queue", e.URL(), "--log-format", "text", "--name", "w-test"}, &logs)
	}()
	n := 0
	err = j.Results(ctx, func(r jobs.Result) error {
		if r.Status != jobs.StatusDone || r.Worker != "w-test" {
			t.Errorf("point %d: status %s by %q", r.Index, r.Status, r.Worker)
		}
		n++
		return nil
	})
	stop()
	if werr := <-done; werr != nil {
		t.Errorf("worker: %v", werr)
	}
	if err != nil || n != 2 {
		t.Fatalf("results: %d, %v", n, err)
	}
	if !strings.Contains(logs.String(), "worker started") || !strings.Contains(logs.String(), "worker stopped") {
		t.Errorf("worker log lacks start/stop lines:\n%s", logs.String())
	}
}
