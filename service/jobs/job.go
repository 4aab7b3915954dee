package jobs

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// Job states.
const (
	StateRunning   = "running"
	StateCancelled = "cancelled"
)

// JobInfo is the record of a job in JobBucket.
type JobInfo struct {
	ID          string          `json:"id"`
	Kind        Kind            `json:"kind"`
	Units       int             `json:"units"`
	State       string          `json:"state"`       // StateRunning or StateCancelled
	Submissions int             `json:"submissions"` // how many times it was submitted (resumes + 1)
	Updated     time.Time       `json:"updated"`
	Spec        json.RawMessage `json:"spec"` // the normalised request
}

// SubmitInfo says what a submission found and queued.
type SubmitInfo struct {
	Units   int // units of the job
	Done    int // units already stored as done (not queued again)
	Retried int // units stored as failed by an earlier run, queued again
	Queued  int // units queued by this submission (Units − Done)
	// DoneIndices are the indices of the units stored as done before this
	// submission, ascending.
	DoneIndices []int
}

// Job is a submitted job.
type Job struct {
	q       *Queue
	ID      string
	indices map[int]bool
}

// ErrCancelled is returned by Results when the job is cancelled.
var ErrCancelled = errors.New("jobs: job cancelled")

// ErrUnknownJob is returned for a job ID with no record.
var ErrUnknownJob = errors.New("jobs: no such job")

// Submit records the job and queues every unit that has no stored done
// result; units stored as failed are deleted and queued again. Units still
// queued from an earlier submission are replaced, so none runs twice
// because of a resume (one running at the time of the resume may finish
// once more; its result is identical and stored once).
func (q *Queue) Submit(ctx context.Context, kind Kind, units []Unit, spec any) (*Job, SubmitInfo, error) {
	if len(units) == 0 {
		return nil, SubmitInfo{}, errors.New("jobs: a job needs at least one unit")
	}
	id := units[0].Job
	j := &Job{q: q, ID: id, indices: make(map[int]bool, len(units))}
	for _, u := range units {
		if u.Job != id || u.Kind != kind {
			return nil, SubmitInfo{}, fmt.Errorf("jobs: unit %s does not belong to job %s of kind %s", u.ID(), id, kind)
		}
		if j.indices[u.Index] {
			return nil, SubmitInfo{}, fmt.Errorf("jobs: unit index %d twice", u.Index)
		}
		j.indices[u.Index] = true
	}
	specJSON, err := json.Marshal(spec)
	if err != nil {
		return nil, SubmitInfo{}, err
	}
	info := JobInfo{ID: id, Kind: kind, Units: len(units), State: StateRunning, Spec: specJSON}
	if old, err := q.Info(ctx, id); err == nil {
		info.Submissions = old.Submissions
	} else if !errors.Is(err, ErrUnknownJob) {
		return nil, SubmitInfo{}, err
	}
	info.Submissions++
	info.Updated = time.Now().UTC()
	if err := q.putInfo(ctx, info); err != nil {
		return nil, SubmitInfo{}, err
	}
	stored, err := q.stored(ctx, id)
	if err != nil {
		return nil, SubmitInfo{}, err
	}
	si := SubmitInfo{Units: len(units)}
	for idx, st := range stored {
		if !j.indices[idx] {
			continue
		}
		if st == StatusDone {
			si.Done++
			si.DoneIndices = append(si.DoneIndices, idx)
			continue
		}
		si.Retried++
		key := id + "." + strconv.Itoa(idx)
		if err := retry(ctx, func(c context.Context) error { return q.results.Delete(c, key) }); err != nil {
			return nil, SubmitInfo{}, fmt.Errorf("jobs: clearing failed unit %s: %w", key, err)
		}
	}
	sort.Ints(si.DoneIndices)
	subject := UnitSubjectPrefix + id
	if err := retry(ctx, func(c context.Context) error {
		return q.stream.Purge(c, jetstream.WithPurgeSubject(subject))
	}); err != nil {
		return nil, SubmitInfo{}, fmt.Errorf("jobs: clearing queued units: %w", err)
	}
	// Publish asynchronously (one round trip for all, not one per unit);
	// any unit whose publication is not confirmed is published again
	// synchronously (the message ID makes a repeat harmless).
	type pending struct {
		u   Unit
		b   []byte
		id  string
		ack jetstream.PubAckFuture
	}
	var pend []pending
	flush := func() error {
		select {
		case <-q.js.PublishAsyncComplete():
		case <-time.After(30 * time.Second):
		case <-ctx.Done():
			return ctx.Err()
		}
		for _, pu := range pend {
			ok := false
			if pu.ack != nil {
				select {
				case <-pu.ack.Ok():
					ok = true
				default:
				}
			}
			if !ok {
				if err := retry(ctx, func(c context.Context) error {
					_, err := q.js.Publish(c, subject, pu.b, jetstream.WithMsgID(pu.id))
					return err
				}); err != nil {
					return fmt.Errorf("jobs: queueing unit %s: %w", pu.u.ID(), err)
				}
			}
			si.Queued++
		}
		pend = pend[:0]
		return nil
	}
	for _, u := range units {
		if stored[u.Index] == StatusDone {
			continue
		}
		b, err := json.Marshal(u)
		if err != nil {
			return nil, SubmitInfo{}, fmt.Errorf("jobs: encoding unit %s: %w", u.ID(), err)
		}
		pu := pending{u: u, b: b, id: fmt.Sprintf("%s.%d", u.ID(), info.Submissions)}
		pu.ack, _ = q.js.PublishAsync(subject, b, jetstream.WithMsgID(pu.id))
		pend = append(pend, pu)
		if len(pend) == publishBatch {
			if err := flush(); err != nil {
				return nil, SubmitInfo{}, err
			}
		}
	}
	if err := flush(); err != nil {
		return nil, SubmitInfo{}, err
	}
	return j, si, nil
}

// publishBatch is how many units are published before waiting for their
// confirmations (below the client's limit of outstanding asynchronous
// publications).
var publishBatch = 1000

// Units is the number of units of the job.
func (j *Job) Units() int { return len(j.indices) }

// Info returns the job record.
func (q *Queue) Info(ctx context.Context, id string) (JobInfo, error) {
	var info JobInfo
	err := retry(ctx, func(c context.Context) error {
		e, err := q.jobsKV.Get(c, id)
		if errors.Is(err, jetstream.ErrKeyNotFound) {
			return ErrUnknownJob
		}
		if err != nil {
			return err
		}
		return json.Unmarshal(e.Value(), &info)
	})
	if errors.Is(err, ErrUnknownJob) {
		return info, fmt.Errorf("%w %q", ErrUnknownJob, id)
	}
	return info, err
}

func (q *Queue) putInfo(ctx context.Context, info JobInfo) error {
	b, err := json.Marshal(info)
	if err != nil {
		return err
	}
	return retry(ctx, func(c context.Context) error { _, err := q.jobsKV.Put(c, info.ID, b); return err })
}

// stored returns the status of every stored result of job id by index.
func (q *Queue) stored(ctx context.Context, id string) (map[int]string, error) {
	out := map[int]string{}
	err := q.scan(ctx, id, func(r Result) error { out[r.Index] = r.Status; return nil })
	return out, err
}

// scan calls fn for every stored result of job id.
func (q *Queue) scan(ctx context.Context, id string, fn func(Result) error) error {
	return retry(ctx, func(c context.Context) error {
		w, err := q.results.Watch(c, id+".*", jetstream.IgnoreDeletes())
		if err != nil {
			return err
		}
		defer w.Stop()
		for {
			select {
			case <-c.Done():
				return c.Err()
			case e, ok := <-w.Updates():
				if !ok {
					return nats.ErrDisconnected
				}
				if e == nil {
					return nil
				}
				r, err := DecodeResult(e.Value())
				if err != nil {
					return fmt.Errorf("jobs: result %s: %w", e.Key(), err)
				}
				if err := fn(r); err != nil {
					return err
				}
			}
		}
	})
}

// Results calls fn once for every result of the job, the ones stored
// before the call first, then each as it is stored, and returns nil when
// every unit has a result. It returns ctx.Err() when ctx ends,
// ErrCancelled when the job is cancelled, or fn's error. It survives a
// server restart (the watch is re-established and already seen results are
// skipped).
func (j *Job) Results(ctx context.Context, fn func(Result) error) error {
	seen := make(map[int]bool, len(j.indices))
	for len(seen) < len(j.indices) {
		err := j.watch(ctx, seen, fn)
		if err == nil || ctx.Err() != nil {
			if ctx.Err() != nil {
				return ctx.Err()
			}
			continue
		}
		if !transient(err) && !errors.Is(err, errStalled) {
			return err
		}
		if info, ierr := j.q.Info(ctx, j.ID); ierr == nil && info.State == StateCancelled {
			return ErrCancelled
		}
	}
	return nil
}

var errStalled = errors.New("jobs: result watch stalled")

// stallAfter is how long a result watch may stay silent before it is
// re-established (a watch does not always survive a server restart).
var stallAfter = 3 * time.Second

func (j *Job) watch(ctx context.Context, seen map[int]bool, fn func(Result) error) error {
	wctx, cancel := context.WithCancel(ctx)
	defer cancel()
	w, err := j.q.results.Watch(wctx, j.ID+".*", jetstream.IgnoreDeletes())
	if err != nil {
		return err
	}
	defer w.Stop()
	timer := time.NewTimer(stallAfter)
	defer timer.Stop()
	for len(seen) < len(j.indices) {
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-timer.C:
			return errStalled
		case e, ok := <-w.Updates():
			if !ok {
				return errStalled
			}
			timer.Reset(stallAfter)
			if e == nil || e.Operation() != jetstream.KeyValuePut {
				continue
			}
			idx, err := strconv.Atoi(strings.TrimPrefix(e.Key(), j.ID+"."))
			if err != nil || !j.indices[idx] || seen[idx] {
				continue
			}
			r, err := DecodeResult(e.Value())
			if err != nil {
				return fmt.Errorf("jobs: result %s: %w", e.Key(), err)
			}
			seen[idx] = true
			if err := fn(r); err != nil {
				return err
			}
		}
	}
	return nil
}

// JobStatus is a job's progress.
type JobStatus struct {
	Info    JobInfo
	Done    int // units stored as done
	Failed  int // units stored as failed
	Pending int // units queued or running (no result yet)
}

// Status returns the job's record and counts.
func (q *Queue) Status(ctx context.Context, id string) (JobStatus, error) {
	info, err := q.Info(ctx, id)
	if err != nil {
		return JobStatus{}, err
	}
	st := JobStatus{Info: info}
	err = q.scan(ctx, id, func(r Result) error {
		if r.Status == StatusDone {
			st.Done++
		} else {
			st.Failed++
		}
		return nil
	})
	st.Pending = max(0, info.Units-st.Done-st.Failed)
	return st, err
}

// Cancel marks the job cancelled and removes its queued units; workers drop
// any of its units they receive. Units running at the time finish and are
// stored. Submitting the job again resumes it.
func (q *Queue) Cancel(ctx context.Context, id string) error {
	info, err := q.Info(ctx, id)
	if err != nil {
		return err
	}
	info.State = StateCancelled
	info.Updated = time.Now().UTC()
	if err := q.putInfo(ctx, info); err != nil {
		return err
	}
	return retry(ctx, func(c context.Context) error {
		return q.stream.Purge(c, jetstream.WithPurgeSubject(UnitSubjectPrefix+id))
	})
}
