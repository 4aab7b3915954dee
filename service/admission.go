package service

import (
	"context"
	"fmt"
	"sync/atomic"
	"time"
)

// admission bounds the runs executing at once (slots) with a short queue
// in front: a call that finds every slot busy waits in the queue if there
// is room (up to timeout), otherwise it is turned away at once with
// RESOURCE_EXHAUSTED and a RetryInfo.
type admission struct {
	slots   chan struct{}
	queue   int64
	waiting atomic.Int64
	timeout time.Duration
	retry   time.Duration
	onWait  func(delta int) // queue-length metric hook, may be nil
}

func newAdmission(limit, queue int, timeout, retry time.Duration) *admission {
	return &admission{
		slots:   make(chan struct{}, limit),
		queue:   int64(queue),
		timeout: timeout,
		retry:   retry,
	}
}

// acquire takes a run slot, or returns a status error: RESOURCE_EXHAUSTED
// (queue full or queue wait over), CANCELED or DEADLINE_EXCEEDED. On
// success the caller must call the returned release exactly once.
func (a *admission) acquire(ctx context.Context) (release func(), err error) {
	release = func() { <-a.slots }
	select {
	case a.slots <- struct{}{}:
		return release, nil
	default:
	}
	if a.waiting.Add(1) > a.queue {
		a.waiting.Add(-1)
		return nil, overloaded(fmt.Sprintf(
			"server busy: %d runs in progress (max_concurrent_runs) and %d waiting (queue_length); retry later",
			cap(a.slots), a.queue), a.retry)
	}
	if a.onWait != nil {
		a.onWait(1)
	}
	defer func() {
		a.waiting.Add(-1)
		if a.onWait != nil {
			a.onWait(-1)
		}
	}()
	timer := time.NewTimer(a.timeout)
	defer timer.Stop()
	select {
	case a.slots <- struct{}{}:
		return release, nil
	case <-timer.C:
		return nil, overloaded(fmt.Sprintf(
			"server busy: no run slot free within the queue timeout %s; retry later", a.timeout), a.retry)
	case <-ctx.Done():
		return nil, statusFromError(ctx, ctx.Err())
	}
}

// limiter is a non-queueing counter limit (Lockstep streams).
type limiter struct {
	n     atomic.Int64
	limit int64
	retry time.Duration
}

func (l *limiter) acquire() (func(), error) {
	if l.n.Add(1) > l.limit {
		l.n.Add(-1)
		return nil, overloaded(fmt.Sprintf(
			"server busy: %d Lockstep streams open (max_lockstep_streams); retry later", l.limit), l.retry)
	}
	return func() { l.n.Add(-1) }, nil
}
