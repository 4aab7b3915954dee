package main

import (
	"bufio"
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/render"
	htmlreport "github.com/fadeloop/fadeloop/client/report"
	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/tune"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"github.com/fadeloop/fadeloop/service"
	"github.com/fadeloop/fadeloop/service/jobs"
)

// queueLocal is the --queue value of the embedded NATS server (the default
// when no --server, --queue or --direct is given).
const queueLocal = "local"

// sweepQueueFlags select and configure the job-queue path of sweep, tune
// and capacity.
type sweepQueueFlags struct {
	queue   string // "", queueLocal or nats://HOST:PORT[,…]
	store   string // root of the embedded stores (one directory per job)
	workers int    // in-process workers (0: default)
	direct  bool   // run in process without the queue
	status  string // job ID to show (sweep)
	cancel  string // job ID to cancel (sweep)
}

// storeHelp says where the embedded job stores live (flag help).
const storeHelp = "root `DIR` of the job stores: each job keeps its finished units in DIR/JOB (default <user cache dir>/fadeloop/queue, e.g. ~/.cache/fadeloop/queue; ignored with --server, --direct or a nats:// --queue)"

func (q *sweepQueueFlags) register(fs *flag.FlagSet) {
	q.registerRun(fs, "sweep")
	fs.StringVar(&q.status, "status", "", "show the state of queued sweep `JOB` and exit")
	fs.StringVar(&q.cancel, "cancel", "", "cancel queued sweep `JOB` (stored points stay; re-running its command resumes it) and exit")
}

// registerRun registers the flags that choose where the units of cmd run.
func (q *sweepQueueFlags) registerRun(fs *flag.FlagSet, cmd string) {
	fs.StringVar(&q.queue, "queue", "", "where the "+cmd+" job runs: `URL` nats://HOST:PORT[,...] (an external NATS and its workers) or local (the default: a NATS server inside this process, its store under --store)")
	fs.StringVar(&q.store, "store", "", storeHelp)
	fs.IntVar(&q.workers, "workers", 0, "in-process queue workers `N`, each one unit at a time (default: one per core with the local queue, none with a nats:// URL)")
	fs.BoolVar(&q.direct, "direct", false, "run the "+cmd+" in this process without the job queue (nothing stored, no resume)")
}

// queued reports whether the run goes through the job queue: the default
// unless --server or --direct is given.
func (q *sweepQueueFlags) queued(g *globals) bool { return g.server == "" && !q.direct }

// local reports whether the queue is the embedded one.
func (q *sweepQueueFlags) local() bool { return q.queue == "" || q.queue == queueLocal }

// check validates the queue flags against the global ones.
func (q *sweepQueueFlags) check(g *globals) error {
	if g.server != "" && (q.queue != "" || q.status != "" || q.cancel != "") {
		return badInputf("--server runs directly on that server; --queue, --status and --cancel need no --server")
	}
	if q.direct && (q.queue != "" || q.status != "" || q.cancel != "" || q.workers != 0) {
		return badInputf("--direct runs in this process without the job queue; it does not go with --queue, --workers, --status or --cancel")
	}
	if q.status != "" && q.cancel != "" {
		return badInputf("--status and --cancel: give one of them")
	}
	if q.queue != "" && q.queue != queueLocal && !strings.HasPrefix(q.queue, "nats://") && !strings.HasPrefix(q.queue, "tls://") {
		return badInputf("--queue %q: must be local or nats://HOST:PORT (comma-separated for a cluster)", q.queue)
	}
	if q.workers < 0 {
		return badInputf("--workers %d: must be 0 (default) or more", q.workers)
	}
	return nil
}

// noQueue is returned when the default local queue cannot open its store
// (no user cache directory, not writable, ...): the command then runs
// without the queue (see fallback).
type noQueue struct{ err error }

func (n noQueue) Error() string { return n.err.Error() }
func (n noQueue) Unwrap() error { return n.err }

// fallback reports whether err, from opening the queue, lets the command
// run without it: only for the default queue with the default store root
// (a store named with --store or FADELOOP_STORE, an external queue and a
// job running in another process are errors).
func (q *sweepQueueFlags) fallback(err error) bool {
	return q.queue == "" && q.store == "" && !errors.Is(err, jobs.ErrStoreInUse)
}

// noQueueNotice says that the command runs without the queue, and why.
func noQueueNotice(e *env, err error) {
	fmt.Fprintf(e.stderr, "fadeloop: no job store (%v); running in this process without the job queue (nothing stored, no resume; --store DIR names a store)\n", err)
}

// storeRoot is the root of the embedded job stores.
func (q *sweepQueueFlags) storeRoot() (string, error) {
	if q.store != "" {
		return q.store, nil
	}
	return jobs.DefaultStoreDir()
}

// open connects to the queue of job id: the embedded server on the job's
// own store (ROOT/JOB), or the external NATS; an external queue that cannot
// be reached is "unreachable" (exit 3). withWorkers false starts no
// in-process worker.
func (q *sweepQueueFlags) open(ctx context.Context, id string, withWorkers bool) (*client.JobQueue, error) {
	o := client.JobQueueOptions{Workers: q.workers}
	if q.local() {
		root, err := q.storeRoot()
		if err != nil {
			return nil, err
		}
		o.StoreDir = jobs.JobStoreDir(root, id)
	} else {
		o.URL = q.queue
	}
	if !withWorkers {
		o.Workers = -1
	}
	jq, err := client.OpenJobQueue(ctx, o)
	if err != nil {
		if o.URL != "" {
			return nil, unreachable{err}
		}
		return nil, err
	}
	return jq, nil
}

// queueControl runs --status or --cancel.
func queueControl(ctx context.Context, e *env, q *sweepQueueFlags) error {
	id := q.status
	if q.cancel != "" {
		id = q.cancel
	}
	if q.local() {
		root, err := q.storeRoot()
		if err != nil {
			return err
		}
		if _, err := os.Stat(jobs.JobStoreDir(root, id)); err != nil || id == "" || strings.ContainsAny(id, `/\.`) {
			return badInputf("no job %s in %s", id, root)
		}
	}
	jq, err := q.open(ctx, id, false)
	if err != nil {
		return err
	}
	defer jq.Close()
	if q.cancel != "" {
		if err := jq.Cancel(ctx, id); err != nil {
			return queueJobError(id, err)
		}
	}
	st, err := jq.Status(ctx, id)
	if err != nil {
		return queueJobError(id, err)
	}
	state := st.Info.State
	if state != jobs.StateCancelled && st.Pending == 0 && st.Done+st.Failed == st.Info.Units {
		state = "complete"
	}
	fmt.Fprintf(e.stdout, "job %s: %s, %d points: %d done, %d failed, %d pending (submitted %d times, last change %s; %s)\n",
		st.Info.ID, state, st.Info.Units, st.Done, st.Failed, st.Pending, st.Info.Submissions,
		st.Info.Updated.UTC().Format("2006-01-02 15:04:05 UTC"), jq.Where())
	return nil
}

func queueJobError(id string, err error) error {
	if errors.Is(err, jobs.ErrUnknownJob) {
		return badInputf("no job %s in this queue", id)
	}
	return err
}

// sweepSpec is the domain form of a sweep request (the queue path carries
// no proto).
func sweepSpec(req *pb.SweepRequest) jobs.SweepSpec {
	spec := jobs.SweepSpec{
		Base:         service.ScenarioFromProto(req.GetBase()),
		PerPointSeed: req.GetSeedMode() == pb.SeedMode_SEED_MODE_PER_POINT,
		Detailed:     req.GetDetailed(),
	}
	for _, a := range req.GetAxes() {
		spec.Axes = append(spec.Axes, service.AxisFromProto(a))
	}
	for _, i := range req.GetPointIndices() {
		spec.Points = append(spec.Points, int(i))
	}
	sort.Ints(spec.Points)
	return spec
}

// sweepIncomplete is returned after the closing line has been printed: the
// job is not complete (exit 1).
type sweepIncomplete struct{ msg string }

func (s sweepIncomplete) Error() string { return s.msg }

// stopProgress ends the progress display; an unfinished run leaves no
// closing "done" line.
func stopProgress(prog *progress, complete bool) {
	if complete || prog.mode != "lines" {
		prog.done()
	}
}

// runQueuedSweep runs req as a durable job on the job queue (the embedded
// one by default) and shows it as the direct path does (the same table,
// CSV, JSON, report and plots): every point is stored as it finishes, csv
// and jsonl rows go to the --out file at once, an interrupted run says
// what is stored where and how to resume, and re-running the same command
// resumes it.
func runQueuedSweep(ctx context.Context, e *env, q *sweepQueueFlags, req *pb.SweepRequest, so sweepOutputs,
	sf *client.ScenarioFile, gridFile *client.SourceFile) error {
	if e.g.tokenFile != "" || e.g.tls != (client.TLSOptions{}) {
		return badInputf("TLS and --auth-token-file flags need --server (the job queue runs without a fadeloop server)")
	}
	format := e.g.format
	if !e.given["format"] && strings.EqualFold(filepath.Ext(e.g.out), ".jsonl") {
		format = "jsonl"
	}
	if !e.given["format"] && q.queue != "" && strings.EqualFold(filepath.Ext(e.g.out), ".csv") {
		format = "csv" // as --queue wrote before it became the default
	}
	if format == "jsonl" && (e.g.out == "" || e.g.out == "-") {
		return badInputf("--format jsonl writes each point to a file as it arrives: give --out FILE.jsonl")
	}
	spec := sweepSpec(req)
	prep, err := jobs.Prepare(spec)
	if err != nil {
		return queueInvalid(sf, gridFile, err)
	}
	start := time.Now()
	if e.g.timeout > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, e.g.timeout)
		defer cancel()
	}
	jq, err := q.open(ctx, prep.ID, true)
	if err != nil {
		if q.fallback(err) && format != "jsonl" {
			return noQueue{err}
		}
		return err
	}
	defer jq.Close()
	// csv and jsonl to a file: every row is on disk as soon as it arrives.
	var stream rowStream
	if e.g.out != "" && e.g.out != "-" && (format == "csv" || format == "jsonl") {
		if format == "jsonl" {
			stream, err = newJSONLStream(e.g.out, prep.Spec.Axes)
		} else {
			stream, err = newCSVStream(e.g.out, req.Axes, render.SweepIsLayout(req))
		}
		if err != nil {
			return badInput{err}
		}
	}
	prog := e.newProgress("user-slots/s")
	var (
		rows      []jobs.Result
		pts       []*pb.SweepPoint
		before    = map[int]bool{}
		userSlots int64 // computed by this run
		units     int
	)
	outcome, err := jq.Sweep(ctx, spec, client.SweepJobOptions{
		OnSubmit: func(id string, info jobs.SubmitInfo) {
			units = info.Units
			for _, i := range info.DoneIndices {
				before[i] = true
			}
			if e.g.quiet && info.Done == 0 && info.Retried == 0 {
				return // --quiet: only a resumed run says so
			}
			line := fmt.Sprintf("job %s (%s): %d of %d points already stored, %d to run", id, jq.Where(), info.Done, info.Units, info.Queued)
			if info.Retried > 0 {
				line += fmt.Sprintf(" (%d failed earlier, queued again)", info.Retried)
			}
			fmt.Fprintln(e.stderr, line)
		},
		OnResult: func(r jobs.Result) error {
			rows = append(rows, r)
			var pt *pb.SweepPoint
			if r.Report != nil {
				pt = service.SweepPointToProto(&tune.SweepPoint{Index: int64(r.Index), Point: r.Point, Seed: r.Seed, Report: r.Report}, prep.Spec.Detailed)
				pts = append(pts, pt)
				if !before[r.Index] {
					userSlots += r.Report.SimulatedUserSlots
				}
			}
			if stream != nil {
				if err := stream.write(r, pt); err != nil {
					return err
				}
			}
			el := prog.now().Sub(prog.start).Seconds()
			prog.update(float64(len(rows))/float64(max(units, 1)), float64(userSlots)/math.Max(el, 1e-9))
			return nil
		},
	})
	stopProgress(prog, err == nil)
	where := jq.Where()
	if stream != nil {
		where = e.g.out + " and the job " + where
	} else {
		where = "the job " + where
	}
	if outcome.JobID == "" && err != nil {
		if stream != nil {
			stream.close()
		}
		return queueInvalid(sf, gridFile, err)
	}
	if err != nil {
		if stream != nil {
			stream.close()
		}
		fmt.Fprintln(e.stderr, outcome.Describe(err, where))
		return sweepIncomplete{"sweep not complete"}
	}
	sort.Slice(pts, func(i, j int) bool { return pts[i].GetIndex() < pts[j].GetIndex() })
	wall := time.Since(start).Seconds()
	sum := &pb.SweepSummary{GridPoints: int64(prep.Grid.Size()), PointsComputed: int64(outcome.Units - outcome.AlreadyDone),
		WallTimeS: wall, SimulatedUserSlots: userSlots}
	if wall > 0 {
		sum.UserSlotsPerS = float64(userSlots) / wall
	}
	if stream != nil {
		if err := stream.finish(pts); err != nil {
			return err
		}
		// The file is written: only the report and plots remain.
		if err := so.write(e, &output{w: bufio.NewWriter(io.Discard)}, req, pts, sum); err != nil {
			return err
		}
	} else {
		out, err := e.openOutput()
		if err != nil {
			return err
		}
		defer out.discard()
		if err := so.write(e, out, req, pts, sum); err != nil {
			return err
		}
	}
	if !e.g.quiet || outcome.Failed > 0 {
		fmt.Fprintln(e.stderr, outcome.Describe(nil, where))
	}
	if outcome.Failed > 0 {
		for _, r := range rows {
			if r.Status != jobs.StatusDone {
				fmt.Fprintf(e.stderr, "point %d failed after %d attempts: %s\n", r.Index, r.Attempts, r.Error)
			}
		}
		return sweepIncomplete{fmt.Sprintf("%d of %d points failed", outcome.Failed, outcome.Units)}
	}
	return nil
}

// queueInvalid maps the domain's field violations (loop.Violations, field
// paths as in the proto) onto the files they came from, like the direct path.
func queueInvalid(sf *client.ScenarioFile, gridFile *client.SourceFile, err error) error {
	var vs loop.Violations
	if !errors.As(err, &vs) {
		return err
	}
	inv := &client.InvalidInputError{Message: "invalid sweep"}
	for _, v := range vs {
		inv.Violations = append(inv.Violations, client.FieldViolation{Field: v.Field, Rule: v.Rule})
	}
	if sf == nil && gridFile == nil {
		var b strings.Builder
		for i, v := range inv.Violations {
			if i > 0 {
				b.WriteString("; ")
			}
			b.WriteString(v.String())
		}
		return badInputf("%s", b.String())
	}
	return sweepLocate(sf, gridFile, inv)
}

// writeSweepReport writes the HTML report of a sweep (direct or queued).
func writeSweepReport(path string, req *pb.SweepRequest, pts []*pb.SweepPoint, sum *pb.SweepSummary) error {
	return writeReportFile(path, htmlreport.Input{Sweep: &htmlreport.Sweep{Base: req.GetBase(), Axes: req.GetAxes(), Points: pts, Summary: sum}})
}
