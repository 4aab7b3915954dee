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
	// One fetcher per worker process prepares the next unit (fetch, job and
	// result look-ups) while the slots compute, and hands it to the first
	// free slot: a slot starts its next unit without waiting for a round
	// trip to the server. At most one unit waits beyond those computing.
	ready := make(chan *delivery)
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		defer close(ready)
		q.fetchLoop(ctx, o, ready)
	}()
	seen := &keySet{keys: map[string]*inFlight{}}
	for k := range o.Concurrency {
		wg.Add(1)
		go func() {
			defer wg.Done()
			q.computeLoop(ctx, o, k, ready, seen)
		}()
	}
	wg.Wait()
	return nil
}

// delivery is a fetched unit that is to be computed.
type delivery struct {
	msg     jetstream.Msg
	u       Unit
	attempt int
	log     *slog.Logger
}

// fetchLoop fetches units and hands each to a free slot until ctx ends; a
// unit waiting for a slot has its acknowledgement deadline extended.
func (q *Queue) fetchLoop(ctx context.Context, o WorkerOptions, ready chan<- *delivery) {
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
		d := q.prepare(ctx, o, msg)
		if d == nil {
			continue
		}
		if !q.handOver(ctx, d, ready) {
			return
		}
	}
}

// handOver passes d to a free slot, extending its deadline every AckWait/3
// while it waits; false (and d handed back to the queue) when ctx ends.
func (q *Queue) handOver(ctx context.Context, d *delivery, ready chan<- *delivery) bool {
	t := time.NewTicker(q.cfg.AckWait / 3)
	defer t.Stop()
	for {
		select {
		case ready <- d:
			return true
		case <-t.C:
			_ = d.msg.InProgress()
		case <-ctx.Done():
			_ = d.msg.Nak()
			return false
		}
	}
}

// prepare decodes a delivered unit and drops it (acknowledged, nil) when
// its job is cancelled or its result is already stored by an earlier
// delivery whose acknowledgement was lost.
func (q *Queue) prepare(ctx context.Context, o WorkerOptions, msg jetstream.Msg) *delivery {
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
	// The two look-ups at once.
	var cancelled bool
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		info, err := q.Info(ctx, u.Job)
		cancelled = err == nil && info.State == StateCancelled
	}()
	_, err := q.results.Get(ctx, u.ID())
	stored := err == nil
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
	return &delivery{msg: msg, u: u, attempt: attempt, log: log}
}

// keySet tracks the units this worker process is computing or has
// stored, so that a second copy of a unit fetched while the first is
// computing (a unit queued again by a resumed coordinator) is not computed
// twice: it is acknowledged once the first copy's result is stored (handed
// back if that fails).
type keySet struct {
	mu   sync.Mutex
	keys map[string]*inFlight
}

// inFlight is one unit's computation in this process: done is closed when
// it ends, stored says whether its result is stored.
type inFlight struct {
	done   chan struct{}
	stored bool
}

// maxSeenKeys bounds keySet: beyond it, ended entries are forgotten.
const maxSeenKeys = 4096

// begin records key as computing and returns nil, or returns the entry of
// the copy already computing or stored.
func (s *keySet) begin(key string) *inFlight {
	s.mu.Lock()
	defer s.mu.Unlock()
	if f, ok := s.keys[key]; ok {
		return f
	}
	if len(s.keys) >= maxSeenKeys {
		for k, f := range s.keys {
			select {
			case <-f.done:
				delete(s.keys, k)
			default:
			}
		}
	}
	s.keys[key] = &inFlight{done: make(chan struct{})}
	return nil
}

// end marks key's computation ended; a unit whose result was not stored is
// forgotten, so that its next delivery computes it.
func (s *keySet) end(key string, stored bool) {
	s.mu.Lock()
	defer s.mu.Unlock()
	f := s.keys[key]
	if f == nil {
		return
	}
	f.stored = stored
	close(f.done)
	if !stored {
		delete(s.keys, key)
	}
}

// duplicate acknowledges d, a second copy of a unit, once the first copy's
// result is stored, extending its deadline meanwhile; it is handed back if
// the first copy's result was not stored or the worker stops.
func (q *Queue) duplicate(ctx context.Context, d *delivery, first *inFlight) {
	t := time.NewTicker(q.cfg.AckWait / 3)
	defer t.Stop()
	for {
		select {
		case <-first.done:
			if first.stored {
				_ = d.msg.Ack()
			} else {
				_ = d.msg.Nak()
			}
			return
		case <-t.C:
			_ = d.msg.InProgress()
		case <-ctx.Done():
			_ = d.msg.Nak()
			return
		}
	}
}

// computeLoop computes the units handed to slot until ready is closed.
func (q *Queue) computeLoop(ctx context.Context, o WorkerOptions, slot int, ready <-chan *delivery, seen *keySet) {
	// finished is closed when the previous unit's result is stored and
	// acknowledged: storing runs beside the next computation (off the
	// critical path), at most one per slot.
	finished := make(chan struct{})
	close(finished)
	defer func() { <-finished }()
	for d := range ready {
		if ctx.Err() != nil {
			_ = d.msg.Nak()
			continue
		}
		key := d.u.ID()
		if first := seen.begin(key); first != nil {
			go q.duplicate(ctx, d, first)
			continue
		}
		store := q.handle(ctx, o, slot, d)
		<-finished
		if store == nil {
			seen.end(key, false)
			continue
		}
		next := make(chan struct{})
		finished = next
		go func() {
			defer close(next)
			seen.end(key, store())
		}()
	}
}

// handle computes one delivered unit and returns the step that stores its
// result and then acknowledges it (nil when there is nothing to store: the
// unit was handed back for a retry or because the worker is stopping). The
// result is stored before the acknowledgement, so a unit is acknowledged
// only when its result is safe.
func (q *Queue) handle(ctx context.Context, o WorkerOptions, slot int, d *delivery) (store func() bool) {
	msg, u, attempt, log := d.msg, d.u, d.attempt, d.log
	key := u.ID()
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
	return func() bool { return q.store(ctx, log, msg, key, res) }
}

// store stores a unit's result, then acknowledges the unit, and reports
// whether the result is stored; if it cannot be stored the unit is handed
// back. A worker stopping (ctx ended) still stores a result it has
// computed, for up to storeGrace.
func (q *Queue) store(ctx context.Context, log *slog.Logger, msg jetstream.Msg, key string, res Result) bool {
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
		return false
	}
	if err := msg.DoubleAck(ctx); err != nil {
		// The result is stored; a redelivery finds it and only acknowledges.
		log.Debug("ack", slog.String("error", err.Error()))
	}
	log.Debug("unit stored", slog.String("status", res.Status))
	return true
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
