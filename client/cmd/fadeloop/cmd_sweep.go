package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"math"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

func init() {
	register(&command{
		order:   20,
		name:    "sweep",
		summary: "run a grid of scenarios around a base and print one row per point",
		usage:   "[SCENARIO.yaml|.json]",
		details: `Runs the base scenario (the file, or the built-in default) at every point of
a grid. Axes come from --axis flags and/or a --grid file; the grid is their
Cartesian product, indexed row-major (the last axis varies fastest). Points
are computed in parallel (on the job queue's workers, or on the server with
--server) and arrive as they finish; the output is sorted by grid index. With --seed-mode common (the default) every point
uses the base seed, so differences between points are paired and sharp.

An axis is PATH=V1,V2,... or PATH=FROM:TO:COUNT (COUNT values evenly spaced,
both ends included; PATH=FROM:TO:COUNT:log spaces them geometrically); the
server expands ranges and checks them against its limits ("fadeloop info").
PATH is a numeric scenario field with proto names, e.g.
inner_loop.step_db, inner_loop.update_rate_hz, inner_loop.feedback_delay_slots,
outer_loop.up_step_db, outer_loop.bler_target, groups[0].speeds[0].speed_kmh,
groups[1].count.

A --grid file is the protojson form (JSON or YAML) of fadeloop.v1.SweepRequest:
axes (path, values or first, last, count, log), point_indices, seed_mode, detailed, and optionally base
(used when no scenario file is given).

Output formats:
  table  one row per point: index, axis values, main figures with their 95 % interval [low, high]
  csv    columns index, seed, one column per axis (named by its path), feasible
         (true|false), users, user_slots, then for every figure F its value F,
         F_ci_low and F_ci_high, its 95 % interval (same figures and units as
         "run --format csv").
         Multi-cell (layout.sites set): feasible, the percentiles and
         convergence_time_s are empty (not computed), and other_to_own and
         soft_handover_share follow with their intervals, as in "run".
  json   {"axes": [...], "points": [SweepPoint...], "summary": SweepSummary},
         protojson with proto field names, points sorted by index
  jsonl  (job queue, with --out FILE) one stored result a line as JSON: job,
         index, point, seed, status (done|failed), error, report

Plots (--plot [KIND=]FILE.png|.svg, repeatable; kind defaults to auto):
  steps    outage and SIR error std against inner_loop.step_db, one line per
           value of the other axis (e.g. a speed)
  heatmap  the --objective over inner_loop.step_db × inner_loop.update_rate_hz
  cdf      SIR error distribution per point (at most 8 points)
  layout   multi-cell: f and outage against the first axis, one line per
           value of the second
  auto     heatmap for step × rate, steps for step (× one axis), else cdf
           (multi-cell: layout, for one or two axes)

Where the points run: with no --server the sweep is a durable job on a job
queue (NATS JetStream). By default (--queue local) a NATS server starts
inside this process with its store in <user cache dir>/fadeloop/queue/JOB
(~/.cache/fadeloop/queue/JOB on Linux; --store DIR or FADELOOP_STORE for
another root) and one worker per core (--workers N) computes the points. Each
point is stored as it finishes; --format csv or jsonl with --out FILE writes
every row to FILE at once (the finished file is rewritten in grid order). The
first line names the job and its store and says how many points are already
stored and how many are left to run (with --quiet only when some are
stored). An interrupted run (Ctrl-C, --timeout) says how many points are
stored and where; running the same command again resumes the job (its ID is
a hash of the request) and computes only the missing points. The output is
the same as the direct path's. --queue nats://HOST:PORT[,...] uses an
external NATS and the workers attached to it ("fadeloopd worker").
  --status JOB   state and counts of a job (with the same --queue/--store)
  --cancel JOB   drop a job's queued points; stored points stay
  --direct       run the points in this process without the queue (nothing
                 stored, no resume); --server ADDR runs them on that server.
A job store holds only finished results: delete its directory to start the
job afresh (or the whole root to free the space). Where there is no user
cache directory (and no --store), the sweep runs in this process without the
queue and says so.

--report FILE.html writes an HTML report of the sweep (either path).

` + cautionHelp + `

Examples:
  fadeloop sweep --axis inner_loop.step_db=0.25,0.5,1,2 --slots 15000
  fadeloop sweep cell.yaml --axis inner_loop.step_db=0.5:3:6 \
      --axis 'groups[0].speeds[0].speed_kmh=3,30,120' --plot steps=steps.png
  fadeloop sweep cell.yaml --axis inner_loop.step_db=0.5,1,2 \
      --axis inner_loop.update_rate_hz=500,1000,1500 --plot heat.svg --objective outage
  fadeloop sweep cell.yaml --grid grid.yaml --format csv --out points.csv
  fadeloop sweep cell.yaml --grid grid.yaml --points 4,5,6   # resume or split a sweep
  fadeloop sweep cell.yaml --axis inner_loop.step_db=0.25:2:8 --format csv --out steps.csv   # Ctrl-C, then the same again resumes
  fadeloop sweep cell.yaml --axis inner_loop.step_db=0.25:2:8 --queue nats://10.0.0.5:4222 --format csv --out steps.csv
  fadeloop sweep --status JOB --queue local`,
		run: runSweep,
	})
}

func runSweep(e *env, fs *flag.FlagSet) action {
	var ov scenarioOverrides
	ov.register(fs)
	var axes axisList
	fs.Var(&axes, "axis", "grid axis `PATH=V1,V2,...`, PATH=FROM:TO:COUNT or PATH=FROM:TO:COUNT:log; repeatable")
	grid := fs.String("grid", "", "sweep `FILE` (protojson SweepRequest in JSON or YAML) with axes and options")
	points := fs.String("points", "", "compute only these grid `INDICES` (comma-separated) to resume or split a sweep")
	seedMode := fs.String("seed-mode", "", "`MODE` common (every point uses the base seed: paired) or per-point (default common)")
	detailed := fs.Bool("detailed", false, "keep per-user and per-bin figures in each point (json output)")
	objective := fs.String("objective", "std", "heat map `OBJECTIVE`: std (SIR error std), outage, power (mean Tx power) or bler (|BLER − target|)")
	var plotSpecs plotList
	fs.Var(&plotSpecs, "plot", "write a plot: `[KIND=]FILE` (.png or .svg; kinds auto, steps, heatmap, cdf; multi-cell: layout (f and outage against the first axis)); repeatable")
	reportFile := fs.String("report", "", "write an HTML report of the sweep to `FILE.html`")
	var qf sweepQueueFlags
	qf.register(fs)
	return func(ctx context.Context, args []string) error {
		if err := qf.check(e.g); err != nil {
			return err
		}
		if qf.status != "" || qf.cancel != "" {
			if len(args) > 0 || len(axes) > 0 || *grid != "" {
				return badInputf("--status and --cancel take only the job ID (and --queue/--store)")
			}
			return queueControl(ctx, e, &qf)
		}
		queued := qf.queued(e.g)
		if queued {
			if err := e.g.checkFormat("table", "csv", "json", "jsonl"); err != nil {
				return err
			}
		} else if err := e.g.checkFormat("table", "csv", "json"); err != nil {
			return err
		}
		if err := plotSpecs.check("auto", "auto", "steps", "heatmap", "cdf", "layout"); err != nil {
			return err
		}
		if _, ok := sweepObjectives[*objective]; !ok {
			return badInputf("--objective %q: must be one of std, outage, power, bler", *objective)
		}
		req := &pb.SweepRequest{}
		sf, gridFile, err := loadRequest(*grid, req, &req.Base, args, &ov)
		if err != nil {
			return err
		}
		req.Axes = append(req.Axes, axes...)
		if len(req.Axes) == 0 {
			return badInputf("no axes: give --axis PATH=VALUES or a --grid file")
		}
		if *points != "" {
			req.PointIndices = nil
			for _, f := range strings.Split(*points, ",") {
				v, err := strconv.ParseInt(strings.TrimSpace(f), 10, 64)
				if err != nil || v < 0 {
					return badInputf("--points: %q is not a grid index", f)
				}
				req.PointIndices = append(req.PointIndices, v)
			}
		}
		switch *seedMode {
		case "common":
			req.SeedMode = pb.SeedMode_SEED_MODE_COMMON
		case "per-point":
			req.SeedMode = pb.SeedMode_SEED_MODE_PER_POINT
		case "":
			if req.SeedMode == pb.SeedMode_SEED_MODE_UNSPECIFIED {
				req.SeedMode = pb.SeedMode_SEED_MODE_COMMON
			}
		default:
			return badInputf("--seed-mode %q: must be common or per-point", *seedMode)
		}
		if *detailed {
			req.Detailed = true
		}
		for _, ps := range plotSpecs {
			if err := checkSweepPlot(ps, req.Axes, req.GetBase().GetLayout() != nil); err != nil {
				return err
			}
		}
		if *reportFile != "" && !strings.EqualFold(filepath.Ext(*reportFile), ".html") {
			return badInputf("--report %q: must end in .html", *reportFile)
		}
		so := sweepOutputs{reportFile: *reportFile, plots: plotSpecs, objective: *objective}
		if queued {
			err := runQueuedSweep(ctx, e, &qf, req, so, sf, gridFile)
			var nq noQueue
			if !errors.As(err, &nq) {
				return err
			}
			noQueueNotice(e, nq.err)
		}
		total := int64(len(req.PointIndices))
		if total == 0 {
			total = 1
			for _, a := range req.Axes {
				total *= int64(max(len(a.GetValues()), int(a.GetCount())))
			}
		}

		out, cl, release, err := e.session()
		if err != nil {
			return err
		}
		defer release()
		prog := e.newProgress("user-slots/s")
		call := cl.Sweep(ctx, req)
		var pts []*pb.SweepPoint
		var userSlots float64
		for p, err := range call.Points() {
			if err != nil {
				prog.done()
				if inv, ok := client.AsInvalidInput(err); ok {
					return sweepLocate(sf, gridFile, inv)
				}
				return err
			}
			pts = append(pts, p)
			userSlots += float64(p.GetReport().GetSimulatedUserSlots())
			el := prog.now().Sub(prog.start).Seconds()
			prog.update(float64(len(pts))/float64(total), userSlots/math.Max(el, 1e-9))
		}
		prog.done()
		sort.Slice(pts, func(i, j int) bool { return pts[i].GetIndex() < pts[j].GetIndex() })
		return so.write(e, out, req, pts, call.Summary())
	}
}

// sweepOutputs are the products of a sweep beside its --format output:
// the HTML report and the plots. The direct and the queued path write
// them alike.
type sweepOutputs struct {
	reportFile string
	plots      plotList
	objective  string
}

// write writes the sweep's points (sorted by index) in --format to out and
// commits it, then the report and the plots.
func (so sweepOutputs) write(e *env, out *output, req *pb.SweepRequest, pts []*pb.SweepPoint, sum *pb.SweepSummary) error {
	switch e.g.format {
	case "json":
		if err := render.SweepJSON(out.Writer(), req.Axes, pts, sum); err != nil {
			return err
		}
	case "csv":
		if err := render.SweepCSV(out.Writer(), req.Axes, pts, render.SweepIsLayout(req)); err != nil {
			return err
		}
	default:
		render.SweepTable(out.Writer(), req, pts, sum)
	}
	if err := out.commit(); err != nil {
		return err
	}
	if so.reportFile != "" {
		if err := writeSweepReport(so.reportFile, req, pts, sum); err != nil {
			return err
		}
		if !e.g.quiet {
			fmt.Fprintf(e.stderr, "wrote report to %s\n", so.reportFile)
		}
	}
	title := req.GetBase().GetName()
	for _, ps := range so.plots {
		if err := plotSweep(ps, title, req.Axes, pts, so.objective); err != nil {
			return fmt.Errorf("plot %s: %w", ps.file, err)
		}
		if !e.g.quiet {
			fmt.Fprintf(e.stderr, "wrote %s plot to %s\n", ps.kind, ps.file)
		}
	}
	return nil
}

// sweepLocate maps a Sweep's field violations to the scenario file (base.*)
// or the grid file.
func sweepLocate(sf *client.ScenarioFile, grid *client.SourceFile, inv *client.InvalidInputError) error {
	if sf == nil && grid == nil {
		return inv
	}
	var base, rest []client.FieldViolation
	for _, v := range inv.Violations {
		if strings.HasPrefix(v.Field, "base.") && sf != nil {
			base = append(base, v)
		} else {
			rest = append(rest, v)
		}
	}
	all := &client.ScenarioFileError{}
	if sf != nil {
		e := sf.Locate("base", base)
		all.File = e.File
		all.Violations = append(all.Violations, e.Violations...)
	}
	if grid != nil {
		e := grid.Locate("", rest)
		if all.File == "" {
			all.File = e.File
		}
		all.Violations = append(all.Violations, e.Violations...)
	} else {
		// Without a grid file the axes came from --axis flags: name the
		// flag (counted from 1, in the order given), not the scenario file.
		for _, v := range rest {
			fv, ok := axisFlagViolation(v)
			if !ok {
				fv = client.FileViolation{Path: v.Field, Rule: v.Rule}
			}
			all.Violations = append(all.Violations, fv)
		}
	}
	return all
}

// axisFlagViolation names the --axis flag (counted from 1, in the order
// given) of a violation of the request's axes when they came from flags:
// "axes[i]…" is "--axis i+1"; an axis value that makes the scenario
// invalid ("axes[i].values[k]", whose rule names the path, the value and
// the broken field) is shown without the request path; a combination of
// values ("axes", the rule names the grid point) is "--axis". ok is false
// for other fields.
func axisFlagViolation(v client.FieldViolation) (fv client.FileViolation, ok bool) {
	if v.Field == "axes" {
		return client.FileViolation{Source: "--axis", Rule: v.Rule}, true
	}
	m := axisIndex.FindStringSubmatch(v.Field)
	if m == nil {
		return client.FileViolation{}, false
	}
	n, _ := strconv.Atoi(m[1])
	fv = client.FileViolation{Source: fmt.Sprintf("--axis %d", n+1), Path: v.Field, Rule: v.Rule}
	if m[2] != "" {
		fv.Path = ""
	}
	return fv, true
}

// axisIndex matches a grid violation's axis, axes[i]…, and whether it is
// one of the axis' values (axes[i].values[k] or axes[i].names[k]).
var axisIndex = regexp.MustCompile(`^axes\[(\d+)\](\.(?:values|names)\[\d+\]$)?`)
