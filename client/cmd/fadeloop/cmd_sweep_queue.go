package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"math"
	"path/filepath"
	"sort"
	"strings"

	"github.com/fadeloop/fadeloop/client"
	htmlreport "github.com/fadeloop/fadeloop/client/report"
	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"github.com/fadeloop/fadeloop/service"
	"github.com/fadeloop/fadeloop/service/jobs"
)

// queueLocal is the --queue value that starts the embedded NATS server.
const queueLocal = "local"

// sweepQueueFlags select and configure the job-queue path of sweep.
type sweepQueueFlags struct {
	queue   string // "", queueLocal or nats://HOST:PORT[,…]
	store   string // embedded store directory
	workers int    // in-process workers (0: default)
	status  string // job ID to show
	cancel  string // job ID to cancel
}

func (q *sweepQueueFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&q.queue, "queue", "", "run the sweep as a durable job: `URL` nats://HOST:PORT[,...] (external NATS and its workers) or local (a NATS server inside this process, store under the user cache directory)")
	fs.StringVar(&q.store, "store", "", "on-disk `DIR` of the local queue (implies --queue local; default <user cache dir>/fadeloop/queue)")
	fs.IntVar(&q.workers, "workers", 0, "in-process queue workers `N` (default: one per core with --queue local, none with a nats:// URL)")
	fs.StringVar(&q.status, "status", "", "show the state of queued sweep `JOB` and exit")
	fs.StringVar(&q.cancel, "cancel", "", "cancel queued sweep `JOB` (stored points stay; re-running its command resumes it) and exit")
}

// active reports whether the queue path is selected.
func (q *sweepQueueFlags) active() bool {
	return q.queue != "" || q.store != "" || q.status != "" || q.cancel != ""
}

// check validates the queue flags against the global ones.
func (q *sweepQueueFlags) check(g *globals) error {
	if g.server != "" {
		return badInputf("--server runs the sweep directly on that server; --queue, --store, --status and --cancel need no --server")
	}
	if q.status != "" && q.cancel != "" {
		return badInputf("--status and --cancel: give one of them")
	}
	if q.store != "" && q.queue != "" && q.queue != queueLocal {
		return badInputf("--store is the local queue's directory; it does not go with --queue %s", q.queue)
	}
	if q.queue != "" && q.queue != queueLocal && !strings.HasPrefix(q.queue, "nats://") && !strings.HasPrefix(q.queue, "tls://") {
		return badInputf("--queue %q: must be local or nats://HOST:PORT (comma-separated for a cluster)", q.queue)
	}
	if q.workers < 0 {
		return badInputf("--workers %d: must be 0 (default) or more", q.workers)
	}
	return nil
}

// open connects to the queue; an external queue that cannot be reached is
// "unreachable" (exit 3). withWorkers false starts no in-process worker.
func (q *sweepQueueFlags) open(ctx context.Context, withWorkers bool) (*client.JobQueue, error) {
	o := client.JobQueueOptions{StoreDir: q.store, Workers: q.workers}
	if q.queue != queueLocal {
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
	jq, err := q.open(ctx, false)
	if err != nil {
		return err
	}
	defer jq.Close()
	id := q.status
	if q.cancel != "" {
		id = q.cancel
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
	fmt.Fprintf(e.stdout, "job %s: %s, %d points: %d done, %d failed, %d pending (submitted %d times, last change %s)\n",
		st.Info.ID, state, st.Info.Units, st.Done, st.Failed, st.Pending, st.Info.Submissions,
		st.Info.Updated.UTC().Format("2006-01-02 15:04:05 UTC"))
	return nil
}

func queueJobError(id string, err error) error {
	if errors.Is(err, jobs.ErrUnknownJob) {
		return badInputf("no job %s in this queue", id)
	}
	return err
}

// sweepFileFormat picks the queued sweep's file format: --format csv or
// jsonl, or from the --out extension when --format is left at table.
func sweepFileFormat(e *env) (string, error) {
	if e.g.out == "" {
		return "", badInputf("a queued sweep writes each point to a file as it arrives: give --out FILE.csv or FILE.jsonl")
	}
	switch e.g.format {
	case "csv":
		return client.SweepFileCSV, nil
	case "jsonl":
		return client.SweepFileJSONL, nil
	case "table":
		if !e.given["format"] {
			if strings.EqualFold(filepath.Ext(e.g.out), ".jsonl") {
				return client.SweepFileJSONL, nil
			}
			return client.SweepFileCSV, nil
		}
	}
	return "", badInputf("--format %q: a queued sweep writes csv or jsonl", e.g.format)
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

// runQueuedSweep runs req as a durable job: every point is written to the
// --out file as it arrives; an interrupted run says what is stored and how
// to resume; re-running the same command resumes.
func runQueuedSweep(ctx context.Context, e *env, q *sweepQueueFlags, req *pb.SweepRequest, reportFile string,
	sf *client.ScenarioFile, gridFile *client.SourceFile) error {
	format, err := sweepFileFormat(e)
	if err != nil {
		return err
	}
	spec := sweepSpec(req)
	prep, err := jobs.Prepare(spec)
	if err != nil {
		return queueInvalid(sf, gridFile, err)
	}
	if e.g.timeout > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, e.g.timeout)
		defer cancel()
	}
	jq, err := q.open(ctx, true)
	if err != nil {
		return err
	}
	defer jq.Close()
	file, err := client.CreateSweepFile(e.g.out, format, prep.Spec.Axes) // axes resolved to values
	if err != nil {
		return badInput{err}
	}
	prog := e.newProgress("user-slots/s")
	var rows []jobs.Result
	var userSlots float64
	units := 0
	outcome, err := jq.Sweep(ctx, spec, client.SweepJobOptions{
		OnSubmit: func(id string, info jobs.SubmitInfo) {
			units = info.Units
			line := fmt.Sprintf("job %s: %d points, %d already stored, %d queued", id, info.Units, info.Done, info.Queued)
			if info.Retried > 0 {
				line += fmt.Sprintf(" (%d failed earlier, queued again)", info.Retried)
			}
			prog.done()
			fmt.Fprintln(e.stderr, line)
		},
		OnResult: func(r jobs.Result) error {
			if err := file.Write(r); err != nil {
				return err
			}
			rows = append(rows, r)
			if r.Report != nil {
				userSlots += float64(r.Report.Aggregate.UserSlots)
			}
			el := prog.now().Sub(prog.start).Seconds()
			prog.update(float64(len(rows))/float64(max(units, 1)), userSlots/math.Max(el, 1e-9))
			return nil
		},
	})
	prog.done()
	if outcome.JobID == "" && err != nil {
		file.Close()
		return queueInvalid(sf, gridFile, err)
	}
	if err != nil {
		cerr := file.Close()
		fmt.Fprintln(e.stderr, outcome.Describe(err, e.g.out))
		if cerr != nil {
			return cerr
		}
		return sweepIncomplete{"sweep not complete"}
	}
	if ferr := file.Finish(); ferr != nil {
		return ferr
	}
	fmt.Fprintln(e.stderr, outcome.Describe(nil, e.g.out))
	if reportFile != "" {
		if err := writeSweepReport(reportFile, req, queuedPoints(rows), nil); err != nil {
			return err
		}
		if !e.g.quiet {
			fmt.Fprintf(e.stderr, "wrote report to %s\n", reportFile)
		}
	}
	if outcome.Failed > 0 {
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

// queuedPoints converts the stored results to the sweep points of the
// report, sorted by grid index (failed points have no report and are left
// out).
func queuedPoints(rows []jobs.Result) []*pb.SweepPoint {
	var pts []*pb.SweepPoint
	for _, r := range rows {
		if r.Report == nil {
			continue
		}
		p := &pb.SweepPoint{Index: int64(r.Index), Seed: r.Seed, Report: service.ReportToProto(r.Report)}
		for _, c := range r.Point.Coords {
			p.Coordinates = append(p.Coordinates, c.Value)
		}
		pts = append(pts, p)
	}
	sort.Slice(pts, func(i, j int) bool { return pts[i].GetIndex() < pts[j].GetIndex() })
	return pts
}

// writeSweepReport writes the HTML report of a sweep (direct or queued).
func writeSweepReport(path string, req *pb.SweepRequest, pts []*pb.SweepPoint, sum *pb.SweepSummary) error {
	return writeReportFile(path, htmlreport.Input{Sweep: &htmlreport.Sweep{Base: req.GetBase(), Axes: req.GetAxes(), Points: pts, Summary: sum}})
}
