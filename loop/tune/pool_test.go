package tune

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sync/atomic"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
)

// TestRunPool checks the one worker pool of the package at several
// parallelisms: results in index order, done never called twice at once,
// the first error stopping the rest (no item starts after it beyond those
// running), panics as *loop.PanicError, and cancellation honoured after a
// bounded amount of work.
func TestRunPool(t *testing.T) {
	const n = 200
	square := func(_ context.Context, i int) (int, error) { return i * i, nil }
	for _, par := range []int{1, 2, 3, 8} {
		t.Run(fmt.Sprintf("par%d", par), func(t *testing.T) {
			// Ordered results; done serialised (an overlap would show as
			// two calls in flight).
			var inDone, overlaps, calls atomic.Int64
			out, err := collect(context.Background(), n, par, square, func(int, int) {
				if inDone.Add(1) > 1 {
					overlaps.Add(1)
				}
				calls.Add(1)
				inDone.Add(-1)
			})
			if err != nil {
				t.Fatal(err)
			}
			for i, v := range out {
				if v != i*i {
					t.Fatalf("result %d = %d, want %d", i, v, i*i)
				}
			}
			if calls.Load() != n || overlaps.Load() != 0 {
				t.Errorf("done called %d times (want %d), %d overlapping", calls.Load(), n, overlaps.Load())
			}

			// The first error stops the pool: items after it do not start,
			// except those already running (at most par−1 others).
			planted := errors.New("planted")
			var started atomic.Int64
			st, err := runPool(context.Background(), n, par, func(ctx context.Context, i int) (int, error) {
				started.Add(1)
				if i == 10 {
					return 0, planted
				}
				return i, nil
			}, func(int, int) error { return nil })
			if !errors.Is(err, planted) {
				t.Fatalf("err %v, want the planted error", err)
			}
			if s := started.Load(); s != int64(st.Started) || s > int64(11+par) {
				t.Errorf("%d items started (stats %d) with the error at item 10, want at most %d", s, st.Started, 11+par)
			}

			// An error of done stops it the same way, and is returned.
			st, err = runPool(context.Background(), n, par, square, func(i, _ int) error {
				if i == 5 {
					return planted
				}
				return nil
			})
			if !errors.Is(err, planted) || st.Started > 6+2*par || st.Finished > 5+2*par {
				t.Errorf("done error: err %v, started %d, finished %d", err, st.Started, st.Finished)
			}

			// A panic is a *loop.PanicError carrying the value and a stack.
			_, err = collect(context.Background(), n, par, func(_ context.Context, i int) (int, error) {
				if i == 7 {
					panic("planted")
				}
				return i, nil
			}, nil)
			var pe *loop.PanicError
			if !errors.As(err, &pe) || pe.Value != "planted" || len(pe.Stack) == 0 {
				t.Errorf("panic: got %v, want a *loop.PanicError", err)
			}

			// Cancellation: once ctx is cancelled (inside item 20's done)
			// no item starts; only those running then may finish.
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			var afterCancel atomic.Int64
			var cancelled atomic.Bool
			st, err = runPool(ctx, n, par, func(ctx context.Context, i int) (int, error) {
				if cancelled.Load() {
					afterCancel.Add(1)
				}
				return i, nil
			}, func(i, _ int) error {
				if i == 20 {
					cancelled.Store(true)
					cancel()
				}
				return nil
			})
			if !errors.Is(err, context.Canceled) {
				t.Fatalf("err %v, want context.Canceled", err)
			}
			// Workers other than the cancelling one may be past their
			// check of ctx: at most par−1 items start after the cancel.
			if a := afterCancel.Load(); a > int64(par-1) {
				t.Errorf("%d items started after the cancel, want at most %d", a, par-1)
			}
			if st.Started > 21+par {
				t.Errorf("%d items started, want at most %d", st.Started, 21+par)
			}
		})
	}
	// Nothing to do: no call, ctx's error.
	if st, err := runPool(context.Background(), 0, 2, square, func(int, int) error { return errors.New("called") }); err != nil || st.Started != 0 {
		t.Errorf("empty pool: %+v %v", st, err)
	}
}

// checkFractions checks the FractionDone of a finished search's progress
// events: in [0, 1], never decreasing, below 1 before the last event and
// exactly 1 in the last.
func checkFractions(t *testing.T, name string, ps []SearchProgress) {
	t.Helper()
	if len(ps) == 0 {
		t.Fatalf("%s: no progress events", name)
	}
	prev := 0.0
	for i, p := range ps {
		f := p.FractionDone
		if math.IsNaN(f) || f < 0 || f > 1 {
			t.Errorf("%s: event %d: fraction %g outside [0, 1]", name, i, f)
		}
		if f < prev {
			t.Errorf("%s: event %d: fraction %g after %g (decreases)", name, i, f, prev)
		}
		if i < len(ps)-1 && f >= 1 {
			t.Errorf("%s: event %d of %d: fraction %g reaches 1 before the end", name, i, len(ps), f)
		}
		prev = f
	}
	if last := ps[len(ps)-1].FractionDone; last != 1 {
		t.Errorf("%s: last fraction %g, want exactly 1", name, last)
	}
}

// TestFractionDone: Tune (with and without a budget, with a baseline) and
// Capacity (doubling, a given range, below the range) report a fraction
// done that is monotone, in [0, 1] and exactly 1 at the end only.
func TestFractionDone(t *testing.T) {
	record := func(ps *[]SearchProgress) Options {
		return Options{Parallelism: 2, Progress: func(p SearchProgress) { *ps = append(*ps, p) }}
	}
	// The toy evaluator (pipeline_test.go) keeps this quick under -race:
	// 5 candidates × 3 conditions, 2 replications in the first round.
	tunes := map[string]func() Request{
		"tune": toyRequest,
		"tune budget": func() Request {
			r := toyRequest()
			r.Budget.MaxUserSlots = 120000 // the first round (90 000) and a short baseline
			return r
		},
		"tune no baseline, one condition": func() Request {
			r := toyRequest()
			r.Conditions = nil
			r.SkipBaseline = true
			return r
		},
	}
	for name, req := range tunes {
		var ps []SearchProgress
		rec, err := tuneWith(context.Background(), req(), record(&ps), toyEval)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		checkFractions(t, name, ps)
		if budget := req().Budget.MaxUserSlots > 0; budget != rec.Effort.BudgetExhausted {
			t.Errorf("%s: budget exhausted %v, want %v", name, rec.Effort.BudgetExhausted, budget)
		}
		if got, want := ps[len(ps)-1].ReplicationsDone, rec.Effort.Replications+rec.Effort.BaselineReplications; got != want {
			t.Errorf("%s: last event counts %d runs, want %d", name, got, want)
		}
		// The first run's fraction is at most one over the first round.
		firstRound := 5 * max(len(req().Conditions), 1) * DefaultMinReplications
		if f := ps[0].FractionDone; f > 1/float64(firstRound)+1e-12 {
			t.Errorf("%s: first fraction %g, want at most 1/%d", name, f, firstRound)
		}
	}
	caps := map[string]func() CapacityRequest{
		"capacity doubling": func() CapacityRequest { return capRequest(0.02) },
		"capacity range": func() CapacityRequest {
			r := capRequest(0.02)
			r.MinCount, r.MaxCount = 2, 60
			return r
		},
		"capacity below range": func() CapacityRequest {
			r := capRequest(0.02)
			r.MinCount = 40
			return r
		},
	}
	for name, req := range caps {
		var ps []SearchProgress
		res, err := capacityWith(context.Background(), req(), record(&ps), capToy)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		checkFractions(t, name, ps)
		if got := ps[len(ps)-1].ReplicationsDone; got != res.Replications {
			t.Errorf("%s: last event counts %d runs, want %d", name, got, res.Replications)
		}
	}
}
