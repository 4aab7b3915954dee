package jobs

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"sync"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"github.com/fadeloop/fadeloop/loop"
)

// WorkerOptions configure RunWorker.
type WorkerOptions struct {
	// Concurrency is how many units the worker computes at once (default
	// 1; each unit's engine run already uses every core for its users and
	// replications).
	Concurrency int
	// Name identifies the worker in stored results (default host:pid).
	Name string
	// Logger receives unit events at debug level and problems at warn
	// (default: discard).
	Logger *slog.Logger
	// OnStart, when set, is called as a unit starts computing (tests and
	// progress displays).
	OnStart func(Unit, int)
	// run replaces RunUnit (tests).
	run func(context.Context, Unit) (*loop.Report, error)
}

// RunWorker pulls units from q and computes them until ctx ends. It returns
// nil when ctx ends; a unit being computed then is handed back at once
// (negatively acknowledged) for another worker.
func (q *Queue) RunWorker(ctx context.Context, o WorkerOptions) error {
	if o.Concurrency <= 0 {
		o.Concurrency = 1
	}
	if o.Name == "" {
		h, _ := os.Hostname()
		o.Name = fmt.Sprintf("%s:%d", h, os.Getpid())
	}
	if o.Logger == nil {
		o.Logger = slog.New(slog.DiscardHandler)
	}
	if o.run == nil {
		o.run = RunUnit
	}
	var wg sync.WaitGroup
	for k := range o.Concurrency {
		wg.Add(1)
		go func() {
			defer wg.Done()
			q.workLoop(ctx, o, k)
		}()
	}
	wg.Wait()
	return nil
}

func (q *Queue) workLoop(ctx context.Context, o WorkerOptions, slot int) {
	// finished is closed when the previous unit's result is stored and
	// acknowledged: storing runs beside the next fetch and computation (off
	// the critical path), at most one per slot.
	finished := make(chan struct{})
	close(finished)
	defer func() { <-finished }()
	for ctx.Err() == nil {
		// The fetch ends with ctx, so that a stopping worker (the CLI's
		// in-process ones at the end of every run) returns at once.
		fctx, cancel := context.WithTimeout(ctx, 2*time.Second)
		msg, err := q.cons.Next(jetstream.FetchContext(fctx))
		cancel()
		if ctx.Err() != nil {
			if err == nil {
				_ = msg.Nak() // delivered as we stopped: hand it back
			}
			return
		}
		if err != nil {
			if !errors.Is(err, jetstream.ErrNoMessages) && !errors.Is(err, context.DeadlineExceeded) && !errors.Is(err, nats.ErrTimeout) {
				o.Logger.Debug("fetch", slog.String("error", err.Error()))
				select {
				case <-ctx.Done():
				case <-time.After(250 * time.Millisecond):
				}
			}
			continue
		}
		store := q.handle(ctx, o, slot, msg)
		<-finished
		if store == nil {
			continue
		}
		next := make(chan struct{})
		finished = next
		go func() {
			defer close(next)
			store()
		}()
	}
}

// handle computes one delivered unit and returns the step that stores its
// result and then acknowledges it (nil when there is nothing to store: the
// unit was dropped, handed back or already stored). The result is stored
// before the acknowledgement, so a unit is acknowledged only when its
// result is safe.
func (q *Queue) handle(ctx context.Context, o WorkerOptions, slot int, msg jetstream.Msg) (store func()) {
	attempt := 1
	if md, err := msg.Metadata(); err == nil {
		attempt = int(md.NumDelivered)
	}
	var u Unit
	if err := json.Unmarshal(msg.Data(), &u); err != nil || u.Job == "" {
		o.Logger.Warn("undecodable unit dropped", slog.String("subject", msg.Subject()))
		_ = msg.Term()
		return nil
	}
	log := o.Logger.With(slog.String("unit", u.ID()), slog.Int("attempt", attempt))
	key := u.ID()
	// Two look-ups, at once: is the job cancelled, is the unit stored by an
	// earlier delivery whose acknowledgement was lost?
	var cancelled, stored bool
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		info, err := q.Info(ctx, u.Job)
		cancelled = err == nil && info.State == StateCancelled
	}()
	_, err := q.results.Get(ctx, key)
	stored = err == nil
	wg.Wait()
	if cancelled {
		log.Debug("job cancelled: unit dropped")
		_ = msg.Ack()
		return nil
	}
	if stored {
		_ = msg.Ack()
		return nil
	}
	res := Result{Job: u.Job, Index: u.Index, Point: u.Point, Seed: u.Scenario.Run.Seed, Attempts: attempt, Worker: o.Name}
	if attempt > q.cfg.MaxAttempts {
		res.Status, res.Error = StatusFailed, fmt.Sprintf("no result after %d deliveries (each worker stopped or was lost mid-unit)", attempt-1)
	} else {
		if o.OnStart != nil {
			o.OnStart(u, attempt)
		}
		log.Debug("unit started")
		rep, err := q.compute(ctx, o, msg, u)
		if ctx.Err() != nil {
			// Shutting down: hand the unit back at once.
			_ = msg.Nak()
			return nil
		}
		if err == nil && rep == nil {
			err = errors.New("no report")
		}
		if err != nil {
			if attempt < q.cfg.MaxAttempts {
				log.Warn("unit failed, will be retried", slog.String("error", err.Error()))
				_ = msg.NakWithDelay(time.Duration(attempt) * 500 * time.Millisecond)
				return nil
			}
			res.Status, res.Error = StatusFailed, err.Error()
		} else {
			res.Status, res.Report = StatusDone, rep
		}
	}
	return func() { q.store(ctx, log, msg, key, res) }
}

// store stores a unit's result, then acknowledges the unit; if the result
// cannot be stored the unit is handed back. A worker stopping (ctx ended)
// still stores a result it has computed, for up to storeGrace.
func (q *Queue) store(ctx context.Context, log *slog.Logger, msg jetstream.Msg, key string, res Result) {
	ctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), storeGrace)
	defer cancel()
	b, err := EncodeResult(res)
	if err != nil {
		res.Status, res.Error, res.Report = StatusFailed, "encoding the result: "+err.Error(), nil
		b, _ = EncodeResult(res)
	}
	err = retry(ctx, func(c context.Context) error {
		_, err := q.results.Create(c, key, b)
		if errors.Is(err, jetstream.ErrKeyExists) {
			return nil // stored by another delivery: identical by construction
		}
		return err
	})
	if err != nil {
		log.Warn("storing the result failed; unit handed back", slog.String("error", err.Error()))
		_ = msg.Nak()
		return
	}
	if err := msg.DoubleAck(ctx); err != nil {
		// The result is stored; a redelivery finds it and only acknowledges.
		log.Debug("ack", slog.String("error", err.Error()))
	}
	log.Debug("unit stored", slog.String("status", res.Status))
}

// storeGrace bounds the storing of a computed result once the worker is
// stopping.
const storeGrace = 10 * time.Second

// compute runs the unit, extending the acknowledgement deadline every
// AckWait/3 while it runs.
func (q *Queue) compute(ctx context.Context, o WorkerOptions, msg jetstream.Msg, u Unit) (*loop.Report, error) {
	done := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		t := time.NewTicker(q.cfg.AckWait / 3)
		defer t.Stop()
		for {
			select {
			case <-done:
				return
			case <-t.C:
				_ = msg.InProgress()
			}
		}
	}()
	defer func() { close(done); wg.Wait() }()
	return o.run(ctx, u)
}
