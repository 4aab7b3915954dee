package main

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"runtime"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/render"
	"github.com/fadeloop/fadeloop/service"
	"github.com/fadeloop/fadeloop/service/jobs"
)

// searchQueueHelp is the help paragraph of tune and capacity on where their
// replications run.
const searchQueueHelp = `Where the replications run: with no --server each replication is a unit of
a durable job on the job queue, as for sweep (--queue local by default: a
NATS server inside this process, its store in <user cache
dir>/fadeloop/queue/JOB, --store DIR for another root, --workers N; --queue
nats://HOST:PORT for an external NATS and its workers). The search itself
stays in this process. Every finished replication is stored, so a search
interrupted by Ctrl-C or --timeout and run again computes none of them twice
and gives the same answer; its first line then names the job, its store and
the replications already stored. --direct runs the replications in this
process without the queue.`

// searchJob is a tune or capacity search whose replications run as units
// of a job on the job queue (tune.Options.RunReplication through the
// embedded server's Config.RunReplication): the search itself stays in
// this process, each replication is stored as it finishes, and a re-run of
// the same command finds the stored ones and does not compute them again.
type searchJob struct {
	kind string
	id   string
	jq   *client.JobQueue
}

// searchSession opens the output and the client of a tune or capacity
// search of the domain request spec (its job ID is a hash of it): on the
// job queue by default, as e.session otherwise (--server or --direct).
// The job's first line says where its replications are stored and how
// many are there already. job is nil off the queue.
func (e *env) searchSession(ctx context.Context, q *sweepQueueFlags, kind string, spec any) (out *output, cl *client.Client, release func(), job *searchJob, err error) {
	if err := q.check(e.g); err != nil {
		return nil, nil, nil, nil, err
	}
	if !q.queued(e.g) {
		out, cl, release, err = e.session()
		return out, cl, release, nil, err
	}
	if e.g.tokenFile != "" || e.g.tls != (client.TLSOptions{}) {
		return nil, nil, nil, nil, badInputf("TLS and --auth-token-file flags need --server (the job queue runs without a fadeloop server)")
	}
	id, err := jobs.JobID(kind, spec)
	if err != nil {
		return nil, nil, nil, nil, err
	}
	jq, err := q.open(ctx, id, true)
	if err != nil {
		if q.fallback(err) {
			noQueueNotice(e, err)
			out, cl, release, err = e.session()
			return out, cl, release, nil, err
		}
		return nil, nil, nil, nil, err
	}
	done, _, err := jq.StoredCount(ctx, id)
	if err != nil {
		jq.Close()
		return nil, nil, nil, nil, err
	}
	if done > 0 { // a resumed search says so, and where its store is
		fmt.Fprintf(e.stderr, "%s job %s (%s): %s already stored\n", kind, id, jq.Where(), render.Count(int(done), "replication", "replications"))
	}
	// Replications in flight: enough to keep every worker busy while
	// results travel back (the search's answer does not depend on it).
	inFlight := 64
	if q.local() {
		w := q.workers
		if w == 0 {
			w = runtime.GOMAXPROCS(0)
		}
		inFlight = 2 * w
	}
	cl, err = client.Embedded(service.Config{Logger: slog.New(slog.DiscardHandler), EngineParallelism: inFlight,
		RunReplication: jq.ReplicationRunner(id)}, client.Options{CallTimeout: e.g.timeout})
	if err != nil {
		jq.Close()
		return nil, nil, nil, nil, err
	}
	out, err = e.openOutput()
	if err != nil {
		cl.Close()
		jq.Close()
		return nil, nil, nil, nil, err
	}
	return out, cl, func() { cl.Close(); jq.Close(); out.discard() }, &searchJob{kind: kind, id: id, jq: jq}, nil
}

// stopped maps the error of a search on the job queue that was
// interrupted (Ctrl-C, --timeout) to the message saying what is stored
// where and how to resume (exit 1); other errors pass unchanged.
func (j *searchJob) stopped(ctx context.Context, e *env, err error) error {
	if j == nil || err == nil {
		return err
	}
	if ctx.Err() == nil && !client.IsCanceled(err) && status.Code(err) != codes.DeadlineExceeded {
		return err
	}
	sctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	done, _, serr := j.jq.StoredCount(sctx, j.id)
	if serr != nil {
		return err
	}
	why := " (cancelled)"
	if status.Code(err) == codes.DeadlineExceeded || errors.Is(ctx.Err(), context.DeadlineExceeded) {
		why = " (deadline reached)"
	}
	fmt.Fprintf(e.stderr, "%s job %s interrupted%s: %s stored in the job %s; run the same command again to resume (stored replications are not recomputed)\n",
		j.kind, j.id, why, render.Count(int(done), "replication", "replications"), j.jq.Where())
	return sweepIncomplete{j.kind + " not complete"}
}
