package client

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"runtime"
	"sync"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/service/jobs"
)

// JobQueueOptions configure OpenJobQueue.
type JobQueueOptions struct {
	// URL is the NATS server (nats://host:port, or a comma list of a
	// cluster's servers) whose workers run the units. Empty: start an
	// embedded NATS server with its store in StoreDir and run Workers
	// in-process workers (the single-machine mode, no setup).
	URL string
	// StoreDir is the embedded server's on-disk store (default
	// jobs.DefaultStoreDir(): <user cache dir>/fadeloop/queue). Ignored
	// with URL.
	StoreDir string
	// Workers is the number of in-process workers (default: one per core
	// with the embedded server, none with URL; negative: none). Each computes one unit at
	// a time.
	Workers int
	// Queue configures the stream and workers (ack deadline, attempts,
	// replicas); zero fields take the jobs package defaults.
	Queue jobs.Config
	// Logger receives the workers' warnings (default: discard).
	Logger *slog.Logger
}

// JobQueue runs sweeps as durable batch jobs over NATS JetStream
// (service/jobs): every finished point is stored as it finishes, a re-run of
// the same sweep resumes it, and the work spreads over every worker
// attached to the queue.
type JobQueue struct {
	q     *jobs.Queue
	emb   *jobs.Embedded
	stop  context.CancelFunc
	wg    sync.WaitGroup
	where string
}

// OpenJobQueue connects to o.URL, or starts the embedded server and the
// in-process workers.
func OpenJobQueue(ctx context.Context, o JobQueueOptions) (*JobQueue, error) {
	jq := &JobQueue{}
	url := o.URL
	workers := o.Workers
	if url == "" {
		dir := o.StoreDir
		if dir == "" {
			d, err := jobs.DefaultStoreDir()
			if err != nil {
				return nil, err
			}
			dir = d
		}
		emb, err := jobs.StartEmbedded(dir)
		if err != nil {
			return nil, err
		}
		jq.emb, url = emb, emb.URL()
		jq.where = "store " + dir
		if workers == 0 {
			workers = runtime.GOMAXPROCS(0)
		}
	}
	q, err := jobs.Connect(ctx, url, o.Queue)
	if err != nil {
		if jq.emb != nil {
			jq.emb.Shutdown()
		}
		return nil, err
	}
	jq.q = q
	if jq.where == "" {
		jq.where = "queue " + url
	}
	wctx, cancel := context.WithCancel(context.Background())
	jq.stop = cancel
	if workers > 0 {
		jq.wg.Add(1)
		go func() {
			defer jq.wg.Done()
			_ = q.RunWorker(wctx, jobs.WorkerOptions{Concurrency: workers, Logger: o.Logger})
		}()
	}
	return jq, nil
}

// Close stops the in-process workers (their running units go back to the
// queue) and the embedded server; stored results stay on disk.
func (jq *JobQueue) Close() {
	jq.stop()
	jq.wg.Wait()
	jq.q.Close()
	if jq.emb != nil {
		jq.emb.Shutdown()
	}
}

// Where says where the job results live, for the user: "store DIR" (the
// embedded server's on-disk store) or "queue URL" (an external NATS).
func (jq *JobQueue) Where() string { return jq.where }

// ReplicationRunner returns the tune.Options.RunReplication hook that runs
// each replication of a search as a unit of job on the queue's workers
// (jobs.Queue.ReplicationRunner); a re-run of the same search finds the
// replications already stored and does not compute them again.
func (jq *JobQueue) ReplicationRunner(job string) func(context.Context, loop.Scenario) (*loop.Report, error) {
	return jq.q.ReplicationRunner(job)
}

// StoredCount counts the results of job stored in the queue (done, failed).
func (jq *JobQueue) StoredCount(ctx context.Context, job string) (done, failed int, err error) {
	return jq.q.StoredCount(ctx, job)
}

// SweepJobOptions are the callbacks of JobQueue.Sweep.
type SweepJobOptions struct {
	// OnSubmit is called once the job is queued, with what the submission
	// found (points already stored are not queued again).
	OnSubmit func(jobID string, info jobs.SubmitInfo)
	// OnResult is called for every point, stored ones first, then each as
	// it is stored; an error stops the wait and is returned.
	OnResult func(jobs.Result) error
}

// SweepOutcome is how far a sweep got.
type SweepOutcome struct {
	JobID       string
	Units       int // points of the job
	AlreadyDone int // stored as done before this run
	Queued      int // queued by this run
	Done        int // results seen with status done (old and new)
	Failed      int // results seen with status failed
	Complete    bool
}

// Remaining is the number of points with no result yet.
func (o SweepOutcome) Remaining() int { return o.Units - o.Done - o.Failed }

// Sweep prepares the sweep (validation errors are loop.Violations), submits
// its missing points and waits for every result, passing each to
// o.OnResult. When ctx ends first it returns the outcome so far with
// ctx.Err(): every stored point stays stored, and calling Sweep again with
// the same spec resumes the job.
func (jq *JobQueue) Sweep(ctx context.Context, spec jobs.SweepSpec, o SweepJobOptions) (SweepOutcome, error) {
	p, err := jobs.Prepare(spec)
	if err != nil {
		return SweepOutcome{}, err
	}
	units, err := jobs.SweepUnits(p)
	if err != nil {
		return SweepOutcome{}, err
	}
	out := SweepOutcome{JobID: p.ID, Units: len(units)}
	j, info, err := jq.q.Submit(ctx, jobs.KindSweepPoint, units, p.Spec)
	if err != nil {
		return out, err
	}
	out.AlreadyDone, out.Queued = info.Done, info.Queued
	if o.OnSubmit != nil {
		o.OnSubmit(p.ID, info)
	}
	err = j.Results(ctx, func(r jobs.Result) error {
		if r.Status == jobs.StatusDone {
			out.Done++
		} else {
			out.Failed++
		}
		if o.OnResult != nil {
			return o.OnResult(r)
		}
		return nil
	})
	out.Complete = err == nil
	return out, err
}

// Status returns a job's record and counts.
func (jq *JobQueue) Status(ctx context.Context, jobID string) (jobs.JobStatus, error) {
	return jq.q.Status(ctx, jobID)
}

// Cancel cancels a job: its queued points are dropped; stored ones stay.
func (jq *JobQueue) Cancel(ctx context.Context, jobID string) error {
	return jq.q.Cancel(ctx, jobID)
}

// Describe says what a sweep run did, for the user: complete, or how many
// points are stored where and how to resume. It never calls an unfinished
// job done.
func (o SweepOutcome) Describe(err error, output string) string {
	where := ""
	if output != "" {
		where = " in " + output
	}
	switch {
	case err == nil && o.Failed == 0:
		return fmt.Sprintf("job %s complete: %d points (%d stored earlier, %d computed now)%s",
			o.JobID, o.Units, o.AlreadyDone, o.Units-o.AlreadyDone, where)
	case err == nil:
		return fmt.Sprintf("job %s finished with failures: %d points done, %d failed (their errors are in the output)%s; run the same command again to retry the failed points",
			o.JobID, o.Done, o.Failed, where)
	case errors.Is(err, jobs.ErrCancelled):
		return fmt.Sprintf("job %s was cancelled: %d of %d points stored%s, %d not computed; run the same command again to resume",
			o.JobID, o.Done+o.Failed, o.Units, where, o.Remaining())
	default:
		why := fmt.Sprintf(" (%v)", err)
		switch {
		case errors.Is(err, context.Canceled):
			why = " (cancelled)" // Ctrl-C or SIGTERM
		case errors.Is(err, context.DeadlineExceeded):
			why = " (deadline reached)"
		}
		return fmt.Sprintf("job %s interrupted%s: %d of %d points stored%s, %d remaining; run the same command again to resume (finished points are not recomputed)",
			o.JobID, why, o.Done+o.Failed, o.Units, where, o.Remaining())
	}
}
