package jobs

import (
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"github.com/fadeloop/fadeloop/loop"
)

// ScenarioIndex is the unit index of a scenario that has no grid index (a
// tune replication): the first 62 bits of the SHA-256 of its JSON, so the
// same replication always has the same key and a resumed search finds it.
func ScenarioIndex(sc loop.Scenario) (int, error) {
	b, err := json.Marshal(sc)
	if err != nil {
		return 0, err
	}
	sum := sha256.Sum256(b)
	return int(binary.BigEndian.Uint64(sum[:8]) >> 2), nil
}

// Run computes one unit on the queue's workers and returns its report: the
// stored one when the unit was computed before, else it queues the unit and
// waits for its result. This is how a coordinator that keeps its own
// sequential search (the tuner) sends only its replication units through
// the queue; many Run calls may wait at once. A unit stored as failed
// returns its error (wrapped in a *UnitError); a later Run queues it again.
func (q *Queue) Run(ctx context.Context, u Unit) (*loop.Report, error) {
	key := u.ID()
	queued := false
	for {
		r, err := q.runOnce(ctx, u, key, &queued)
		if err == nil {
			if r.Status != StatusDone {
				return nil, &UnitError{Unit: key, Attempts: r.Attempts, Message: r.Error}
			}
			return r.Report, nil
		}
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		if !transient(err) && !errors.Is(err, errStalled) {
			return nil, err
		}
	}
}

// UnitError is a unit stored as failed.
type UnitError struct {
	Unit     string
	Attempts int
	Message  string
}

func (e *UnitError) Error() string {
	return fmt.Sprintf("unit %s failed after %d attempts: %s", e.Unit, e.Attempts, e.Message)
}

// runNonce makes the message ID of each Run publication unique (with the
// process start time, across processes too).
var runNonce atomic.Int64

func init() { runNonce.Store(time.Now().UnixNano()) }

// runStall is how long Run's watch may stay silent before it is
// re-established (a watch does not always survive a server restart).
var runStall = 30 * time.Second

// runOnce watches the unit's key, queues the unit once (*queued) when
// nothing is stored and waits for the result; errStalled when the watch
// goes silent.
func (q *Queue) runOnce(ctx context.Context, u Unit, key string, queued *bool) (Result, error) {
	wctx, cancel := context.WithCancel(ctx)
	defer cancel()
	w, err := q.results.Watch(wctx, key)
	if err != nil {
		return Result{}, err
	}
	defer w.Stop()
	timer := time.NewTimer(runStall)
	defer timer.Stop()
	for {
		select {
		case <-ctx.Done():
			return Result{}, ctx.Err()
		case <-timer.C:
			return Result{}, errStalled
		case e, ok := <-w.Updates():
			if !ok {
				return Result{}, errStalled
			}
			if e == nil || e.Operation() != jetstream.KeyValuePut {
				// Nothing stored (or a failed result cleared): queue it.
				if !*queued {
					b, err := json.Marshal(u)
					if err != nil {
						return Result{}, err
					}
					// The message ID is unique to this call: a unit cleared
					// after a failure is queued again even within the
					// stream's de-duplication window.
					id := fmt.Sprintf("%s.run.%d", key, runNonce.Add(1))
					if _, err := q.js.Publish(wctx, UnitSubjectPrefix+u.Job, b, jetstream.WithMsgID(id)); err != nil {
						return Result{}, err
					}
					*queued = true
				}
				timer.Reset(runStall)
				continue
			}
			r, err := DecodeResult(e.Value())
			if err != nil {
				return Result{}, fmt.Errorf("jobs: result %s: %w", key, err)
			}
			if r.Status == StatusFailed && !*queued {
				// Failed in an earlier search: clear it and queue again.
				if err := q.results.Delete(wctx, key); err != nil {
					return Result{}, err
				}
				continue
			}
			return r, nil
		}
	}
}

// StoredCount counts the results of job id stored in the queue (done and
// failed): what a resumed coordinator finds already computed.
func (q *Queue) StoredCount(ctx context.Context, id string) (done, failed int, err error) {
	err = q.scan(ctx, id, func(r Result) error {
		if r.Status == StatusDone {
			done++
		} else {
			failed++
		}
		return nil
	})
	return done, failed, err
}

// ReplicationRunner returns a function that runs one fully built, seeded
// scenario as a unit of job on the queue (see Run), for
// tune.Options.RunReplication: the unit index is ScenarioIndex(sc), so the
// same replication of a re-run search is found stored and not computed
// again. The report is the one multicell.RunScenario returns for sc,
// without the per-user and per-bin detail (the search uses the aggregate,
// feasibility and user-slot figures only).
func (q *Queue) ReplicationRunner(job string) func(context.Context, loop.Scenario) (*loop.Report, error) {
	return func(ctx context.Context, sc loop.Scenario) (*loop.Report, error) {
		idx, err := ScenarioIndex(sc)
		if err != nil {
			return nil, err
		}
		return q.Run(ctx, Unit{Kind: KindTuneReplication, Job: job, Index: idx, Scenario: sc})
	}
}
