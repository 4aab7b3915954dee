package main

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"sort"
	"strconv"
	"strings"

	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/client"
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
are computed in parallel on the server and arrive as they finish; the output
is sorted by grid index. With --seed-mode common (the default) every point
uses the base seed, so differences between points are paired and sharp.

An axis is PATH=V1,V2,... or PATH=FROM:TO:COUNT (COUNT values evenly spaced,
both ends included). PATH is a numeric scenario field with proto names, e.g.
inner_loop.step_db, inner_loop.update_rate_hz, inner_loop.feedback_delay_slots,
outer_loop.up_step_db, outer_loop.bler_target, groups[0].speeds[0].speed_kmh,
groups[1].count.

A --grid file is the protojson form (JSON or YAML) of fadeloop.v1.SweepRequest:
axes (path, values), point_indices, seed_mode, detailed, and optionally base
(used when no scenario file is given).

Output formats:
  table  one row per point: index, axis values, main figures (±95 % CI)
  csv    columns index, seed, one column per axis (named by its path), feasible
         (true|false), users, user_slots, then for every figure F its value F,
         F_ci_low and F_ci_high (same figures and units as "run --format csv")
  json   {"axes": [...], "points": [SweepPoint...], "summary": SweepSummary},
         protojson with proto field names, points sorted by index

Plots (--plot [KIND=]FILE.png|.svg, repeatable; kind defaults to auto):
  steps    outage and SIR error std against inner_loop.step_db, one line per
           value of the other axis (e.g. a speed)
  heatmap  the --objective over inner_loop.step_db × inner_loop.update_rate_hz
  cdf      SIR error distribution per point (at most 8 points)
  auto     heatmap for step × rate, steps for step (× one axis), else cdf

Examples:
  fadeloop sweep --axis inner_loop.step_db=0.25,0.5,1,2 --slots 15000
  fadeloop sweep cell.yaml --axis inner_loop.step_db=0.5:3:6 \
      --axis 'groups[0].speeds[0].speed_kmh=3,30,120' --plot steps=steps.png
  fadeloop sweep cell.yaml --axis inner_loop.step_db=0.5,1,2 \
      --axis inner_loop.update_rate_hz=500,1000,1500 --plot heat.svg --objective outage
  fadeloop sweep cell.yaml --grid grid.yaml --format csv --out points.csv
  fadeloop sweep cell.yaml --grid grid.yaml --points 4,5,6   # resume or split a sweep`,
		run: runSweep,
	})
}

// axisList is the repeatable --axis flag.
type axisList []*pb.SweepAxis

func (a *axisList) String() string { return fmt.Sprint(len(*a), " axes") }

func (a *axisList) Set(v string) error {
	path, vals, ok := strings.Cut(v, "=")
	path = strings.TrimSpace(path)
	if !ok || path == "" || strings.TrimSpace(vals) == "" {
		return fmt.Errorf("want PATH=V1,V2,... or PATH=FROM:TO:COUNT")
	}
	ax := &pb.SweepAxis{Path: path}
	if parts := strings.Split(vals, ":"); len(parts) == 3 {
		from, e1 := strconv.ParseFloat(strings.TrimSpace(parts[0]), 64)
		to, e2 := strconv.ParseFloat(strings.TrimSpace(parts[1]), 64)
		n, e3 := strconv.Atoi(strings.TrimSpace(parts[2]))
		if e1 != nil || e2 != nil || e3 != nil || n < 1 || n > 1024 {
			return fmt.Errorf("range %q: want FROM:TO:COUNT with numbers and 1 <= COUNT <= 1024", vals)
		}
		for i := range n {
			x := from
			if n > 1 {
				x = from + (to-from)*float64(i)/float64(n-1)
			}
			ax.Values = append(ax.Values, math.Round(x*1e9)/1e9)
		}
	} else {
		for _, f := range strings.Split(vals, ",") {
			x, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
			if err != nil {
				return fmt.Errorf("value %q is not a number", f)
			}
			ax.Values = append(ax.Values, x)
		}
	}
	*a = append(*a, ax)
	return nil
}

func runSweep(ctx context.Context, e *env, args []string) error {
	c := lookup("sweep")
	fs := e.newFlagSet(c)
	var ov scenarioOverrides
	ov.register(fs)
	var axes axisList
	fs.Var(&axes, "axis", "grid axis `PATH=V1,V2,...` or PATH=FROM:TO:COUNT; repeatable")
	grid := fs.String("grid", "", "sweep `FILE` (protojson SweepRequest in JSON or YAML) with axes and options")
	points := fs.String("points", "", "compute only these grid `INDICES` (comma-separated) to resume or split a sweep")
	seedMode := fs.String("seed-mode", "", "`MODE` common (every point uses the base seed: paired) or per-point (default common)")
	detailed := fs.Bool("detailed", false, "keep per-user and per-bin figures in each point (json output)")
	objective := fs.String("objective", "std", "heat map `OBJECTIVE`: std (SIR error std), outage, power (mean Tx power) or bler (|BLER − target|)")
	var plotSpecs plotList
	fs.Var(&plotSpecs, "plot", "write a plot: `[KIND=]FILE` (.png or .svg; kinds auto, steps, heatmap, cdf; multi-cell: layout (f and outage against the first axis)); repeatable")
	args, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if err := e.g.checkFormat("table", "csv", "json"); err != nil {
		return err
	}
	if err := plotSpecs.check("auto", "auto", "steps", "heatmap", "cdf", "layout"); err != nil {
		return err
	}
	if _, ok := sweepObjectives[*objective]; !ok {
		return badInputf("--objective %q: must be one of std, outage, power, bler", *objective)
	}
	req := &pb.SweepRequest{}
	var gridFile *client.SourceFile
	if *grid != "" {
		data, err := os.ReadFile(*grid)
		if err != nil {
			return badInput{err}
		}
		if gridFile, err = client.ParseMessage(*grid, data, req); err != nil {
			return err
		}
	}
	var sf *client.ScenarioFile
	if len(args) > 0 || req.Base == nil {
		if sf, err = loadScenario(args); err != nil {
			return err
		}
		req.Base = proto.Clone(sf.Scenario).(*pb.Scenario)
	}
	if err := ov.apply(req.Base); err != nil {
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
		if err := checkSweepPlot(ps, req.Axes); err != nil {
			return err
		}
	}
	total := int64(len(req.PointIndices))
	if total == 0 {
		total = 1
		for _, a := range req.Axes {
			total *= int64(len(a.GetValues()))
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
	sum := call.Summary()
	switch e.g.format {
	case "json":
		if err := writeSweepJSON(out.Writer(), req.Axes, pts, sum); err != nil {
			return err
		}
	case "csv":
		if err := writeSweepCSV(out.Writer(), req.Axes, pts); err != nil {
			return err
		}
	default:
		writeSweepTable(out.Writer(), req, pts, sum)
	}
	if err := out.commit(); err != nil {
		return err
	}
	title := req.GetBase().GetName()
	for _, ps := range plotSpecs {
		if err := plotSweep(ps, title, req.Axes, pts, *objective); err != nil {
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
		for _, v := range rest {
			all.Violations = append(all.Violations, client.FileViolation{Path: v.Field, Rule: v.Rule})
		}
	}
	return all
}

var sweepTableFigures = []string{"sir_error_mean_db", "sir_error_std_db", "outage_probability", "achieved_bler",
	"tx_power_mean_dbm", "max_power_fraction", "noise_rise_mean_db"}

func writeSweepTable(w io.Writer, req *pb.SweepRequest, pts []*pb.SweepPoint, sum *pb.SweepSummary) {
	if n := req.GetBase().GetName(); n != "" {
		fmt.Fprintln(w, n)
	}
	if sum != nil {
		fmt.Fprintf(w, "%d of %d grid points, %s user-slots in %.2f s (%s)\n\n", sum.GetPointsComputed(), sum.GetGridPoints(),
			groupDigits(sum.GetSimulatedUserSlots()), sum.GetWallTimeS(), fmtRate(sum.GetUserSlotsPerS(), "user-slots/s"))
	}
	h := []string{"point"}
	for _, a := range req.GetAxes() {
		h = append(h, a.GetPath())
	}
	for _, k := range sweepTableFigures {
		h = append(h, shortLabel(k))
	}
	h = append(h, "load")
	t := newTable(h...)
	for i := 0; i < len(h)-1; i++ {
		t.alignRight(i)
	}
	for _, p := range pts {
		row := []string{strconv.FormatInt(p.GetIndex(), 10)}
		for _, c := range p.GetCoordinates() {
			row = append(row, strconv.FormatFloat(c, 'g', 6, 64))
		}
		for _, k := range sweepTableFigures {
			f, _ := figureByKey(k)
			row = append(row, cell(f, f.get(p.GetReport().GetAggregate())))
		}
		load := "ok"
		if p.GetReport().GetFeasibility().GetInfeasible() {
			load = "INFEASIBLE"
		}
		t.add(append(row, load)...)
	}
	t.write(w)
}

// sweepCSVHeader is the header of `sweep --format csv`.
func sweepCSVHeader(axes []*pb.SweepAxis) []string {
	h := []string{"index", "seed"}
	for _, a := range axes {
		h = append(h, a.GetPath())
	}
	h = append(h, "feasible", "users", "user_slots")
	return append(h, figureCSVHeader()...)
}

func writeSweepCSV(w io.Writer, axes []*pb.SweepAxis, pts []*pb.SweepPoint) error {
	cw := csv.NewWriter(w)
	cw.Write(sweepCSVHeader(axes))
	for _, p := range pts {
		agg := p.GetReport().GetAggregate()
		row := []string{strconv.FormatInt(p.GetIndex(), 10), strconv.FormatUint(p.GetSeed(), 10)}
		for _, c := range p.GetCoordinates() {
			row = append(row, csvNum(c))
		}
		row = append(row, strconv.FormatBool(!p.GetReport().GetFeasibility().GetInfeasible()),
			strconv.Itoa(int(agg.GetUsers())), strconv.FormatInt(agg.GetUserSlots(), 10))
		cw.Write(append(row, figureCSVCells(agg)...))
	}
	cw.Flush()
	return cw.Error()
}

func writeSweepJSON(w io.Writer, axes []*pb.SweepAxis, pts []*pb.SweepPoint, sum *pb.SweepSummary) error {
	doc := struct {
		Axes    []json.RawMessage `json:"axes"`
		Points  []json.RawMessage `json:"points"`
		Summary json.RawMessage   `json:"summary,omitempty"`
	}{Axes: []json.RawMessage{}, Points: []json.RawMessage{}}
	for _, a := range axes {
		b, err := compactJSON(a)
		if err != nil {
			return err
		}
		doc.Axes = append(doc.Axes, b)
	}
	for _, p := range pts {
		b, err := compactJSON(p)
		if err != nil {
			return err
		}
		doc.Points = append(doc.Points, b)
	}
	if sum != nil {
		b, err := compactJSON(sum)
		if err != nil {
			return err
		}
		doc.Summary = b
	}
	raw, err := json.Marshal(doc)
	if err != nil {
		return err
	}
	b, err := indentJSON(raw)
	if err != nil {
		return err
	}
	_, err = w.Write(b)
	return err
}
