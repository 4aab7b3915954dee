package tune

import (
	"context"
	"runtime"
	"sync"

	"github.com/fadeloop/fadeloop/loop"
)

// poolStats is the effort of one runPool call.
type poolStats struct {
	// Started counts the items whose work started; after the first error
	// no item starts, so it exceeds Finished by at most the items that
	// were running then.
	Started int
	// Finished counts the items handed to done without error.
	Finished int
}

// parallelism is the number of workers for n items at the requested
// parallelism par (0 or less: GOMAXPROCS), between 1 and n.
func parallelism(par, n int) int {
	if par <= 0 {
		par = runtime.GOMAXPROCS(0)
	}
	return max(min(par, n), 1)
}

// runPool is the one worker pool of package tune (Sweep, Tune, Capacity):
// it runs work(ctx, i) for i = 0..n−1 on up to par goroutines (0:
// GOMAXPROCS), handing out indices in ascending order, and gives each
// result to done, serialised (never two done calls at once) in completion
// order. A result's content must not depend on when or where it was
// computed; callers that need results in index order store them at index
// i (see collect).
//
// The first error — of a work item, of done, or ctx's — stops the pool: no
// item starts after it, running items see a cancelled context, results
// that finish after it are dropped, and runPool returns that error once
// every worker has stopped (ctx.Err() when ctx was cancelled, whatever the
// items returned then). A panic in work is returned as a *loop.PanicError.
func runPool[T any](ctx context.Context, n, par int, work func(ctx context.Context, i int) (T, error), done func(i int, v T) error) (poolStats, error) {
	var st poolStats
	if n <= 0 {
		return st, ctx.Err()
	}
	runCtx, cancel := context.WithCancel(ctx)
	defer cancel()
	var (
		mu       sync.Mutex // next, st.Started, firstErr
		doneMu   sync.Mutex // serialises done and st.Finished
		next     int
		firstErr error
		wg       sync.WaitGroup
	)
	fail := func(err error) { // with mu held
		if firstErr == nil {
			firstErr = err
			cancel()
		}
	}
	stopped := func() bool {
		mu.Lock()
		defer mu.Unlock()
		return firstErr != nil
	}
	for range parallelism(par, n) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				mu.Lock()
				if firstErr == nil && runCtx.Err() != nil {
					fail(runCtx.Err()) // ctx was cancelled
				}
				if firstErr != nil || next >= n {
					mu.Unlock()
					return
				}
				i := next
				next++
				st.Started++
				mu.Unlock()

				v, err := safeCall(runCtx, i, work)
				if err == nil && runCtx.Err() != nil {
					err = runCtx.Err() // finished as the call ended: not handed over
				}
				if err != nil {
					mu.Lock()
					fail(err)
					mu.Unlock()
					return
				}
				doneMu.Lock()
				if !stopped() {
					if err := done(i, v); err != nil {
						mu.Lock()
						fail(err)
						mu.Unlock()
					} else {
						st.Finished++
					}
				}
				doneMu.Unlock()
			}
		}()
	}
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return st, err
	}
	return st, firstErr
}

// collect runs work for i = 0..n−1 on runPool and returns the results in
// index order, whatever the parallelism; each is also passed to done
// (serialised, in completion order; nil: nothing) as it finishes.
func collect[T any](ctx context.Context, n, par int, work func(ctx context.Context, i int) (T, error), done func(i int, v T)) ([]T, error) {
	out := make([]T, n)
	_, err := runPool(ctx, n, par, work, func(i int, v T) error {
		out[i] = v
		if done != nil {
			done(i, v)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	return out, nil
}

// safeCall runs work(ctx, i), turning a panic (a programmer error) into a
// *loop.PanicError so that the call fails instead of the process.
func safeCall[T any](ctx context.Context, i int, work func(ctx context.Context, i int) (T, error)) (v T, err error) {
	defer func() {
		if r := recover(); r != nil {
			var zero T
			v, err = zero, loop.NewPanicError(r)
		}
	}()
	return work(ctx, i)
}
