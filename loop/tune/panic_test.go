package tune

import (
	"context"
	"errors"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
)

// TestRunJobsRecoversPanics: a panic in one job (a programmer error) comes
// back as a *loop.PanicError from the tuning instead of crashing the process
// that embeds the tuner, whatever the parallelism.
func TestRunJobsRecoversPanics(t *testing.T) {
	for _, par := range []int{1, 2, 4} {
		e := &engine{parallel: par}
		jobs := []job{{0, 0, 0}, {1, 0, 0}, {2, 0, 0}, {3, 0, 0}}
		stored := 0
		err := e.runJobs(context.Background(), jobs, func(_ context.Context, j job) (Sample, error) {
			if j.k == 2 {
				panic("planted")
			}
			return Sample{}, nil
		}, func(job, Sample) { stored++ })
		var pe *loop.PanicError
		if !errors.As(err, &pe) || pe.Value != "planted" || len(pe.Stack) == 0 {
			t.Fatalf("parallel %d: got %v, want a PanicError carrying the value and a stack", par, err)
		}
		if stored != 0 {
			t.Errorf("parallel %d: %d samples stored from a failed batch, want none", par, stored)
		}
	}
}
