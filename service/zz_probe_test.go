package service

import (
	"context"
	"testing"
	"time"

	"github.com/fadeloop/fadeloop/loop"
)

func TestProbeCancelAtStart(t *testing.T) {
	sc := loop.CanonicalScenario()
	for _, delay := range []time.Duration{0, 5 * time.Millisecond, 20 * time.Millisecond, 50 * time.Millisecond, 150 * time.Millisecond} {
		ctx, cancel := context.WithCancel(context.Background())
		go func() { time.Sleep(delay); cancel() }()
		t0 := time.Now()
		_, err := loop.Run(ctx, sc, loop.RunOptions{})
		t.Logf("cancel after %v: returned after %v (%v)", delay, time.Since(t0), err)
	}
}
