package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/render"
	htmlreport "github.com/fadeloop/fadeloop/client/report"
	"github.com/fadeloop/fadeloop/loop/tune"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"github.com/fadeloop/fadeloop/service"
)

func init() {
	register(&command{
		order:   30,
		name:    "tune",
		summary: "find the best step size, update rate, ... over weighted conditions, with paired evidence",
		usage:   "[SCENARIO.yaml|.json]",
		details: `Searches a grid of settings (the --axis values over the base scenario: the
file, or the built-in default) for the one that minimises the --objective
in every condition and over all conditions weighted. All candidates under
one condition see the same seeds (common random numbers), so every
comparison is paired; replications are added only to candidates still in
contention, and a winner is declared only when its paired difference to the
runner-up excludes zero at --confidence. Otherwise the result is a tie set,
broken by the tie rule printed with the result (smaller step first, then
lower update rate, ...). When no candidate meets the constraints there is
no tie rule: the candidates are ranked by their worst relative constraint
excess (in % of the limit), the closest first. Each condition also gets a
fixed-power baseline, except in multi-cell mode (layout.sites set), which
runs none (the fixed-power columns print "–").

An axis is PATH=V1,V2,..., PATH=FROM:TO:COUNT (evenly spaced, both ends
included) or PATH=FROM:TO:COUNT:log (geometric). A condition is
NAME[@WEIGHT]:PATH=VALUE[,PATH=VALUE...]; a VALUE that is not a number sets a
text or enum field (e.g. groups[0].profile=EVA). --speeds V1,V2,... is short
for one condition per speed that sets only speeds[0].speed_kmh of every
group (a group's other speeds entries keep their speeds); the condition is
named by what it sets, "speeds[0].speed_kmh=60".
A --request file is the protojson form (JSON or YAML) of
fadeloop.v1.TuneRequest; flags add to it and override its objective,
confidence and budget.

Output formats:
  table  the verdict (winner, tie of N, constraints unmet, single setting)
         and the API's lines: headline (an unmet constraint first, with
         the closest setting's misses), runner-up, warnings, tie rule;
         per condition the recommended setting first, then the rest in the
         decision's ordering, values as "value [low, high]", the
         fixed-power baseline, the effort
  csv    one row per condition × candidate, per condition baseline and per
         overall candidate: scope (condition|baseline|overall), condition,
         weight, candidate, one column per axis (named by its path), status,
         feasible, best (true|false), verdict (winner|tie|
         constraints_unmet|single, of the row's scope), rank (1 =
         recommended; rows in this order), objective, objective_ci_low,
         objective_ci_high, diff_to_best, diff_to_best_ci_low,
         diff_to_best_ci_high, n, then for every figure F of
         sir_error_mean_db, sir_error_std_db, outage_probability,
         achieved_bler, tx_power_mean_dbm, max_power_fraction,
         noise_rise_mean_db its mean F, F_ci_low and F_ci_high (the interval
         at --confidence, suffixed as in "run" and "sweep"; probabilities as
         fractions). An empty cell is a value not computed.
  json   the fadeloop.v1 Recommendation in protojson with proto field names

Plots (--plot [KIND=]FILE.png|.svg, repeatable; kind defaults to auto):
  heatmap  the overall ranked figure over inner_loop.step_db × update_rate_hz,
           the recommended setting outlined
  steps    outage and SIR error std against inner_loop.step_db, one line per
           condition (step the only axis), each recommended step ringed
  axis     the same against any one axis (e.g. layout.handover.window_db
           on a multi-cell layout)
  auto     heatmap for step × rate, steps for step alone, axis for any
           other single axis; other axis sets have no plot (refused)

` + searchQueueHelp + `

Exit status 4 (after the output is written) when the verdict, overall or
of any condition, is "constraints unmet": no candidate meets the
objective's constraints (outage limit, noise-rise limit, BLER band); the
candidates were then ranked by their worst relative constraint excess.

Examples:
  fadeloop tune --axis inner_loop.step_db=0.25,0.5,1,2 --speeds 3,30,120
  fadeloop tune cell.yaml --axis inner_loop.step_db=0.5,1,2 \
      --axis inner_loop.update_rate_hz=500,1000,1500 --objective outage --plot heat.png
  fadeloop tune cell.yaml --axis inner_loop.step_db=0.25:2:4:log \
      --condition 'walk@3:groups[0].speeds[0].speed_kmh=3' \
      --condition 'car:groups[0].speeds[0].speed_kmh=60,groups[0].profile=VEHA'
  fadeloop tune cell.yaml --request search.yaml --format csv --out tune.csv
  fadeloop tune cell.yaml --axis outer_loop.up_step_db=0.1,0.3,1 \
      --objective power --outage-limit 0.02 --max-reps 16`,
		run: runTune,
	})
}

// speedsConditionName names a --speeds condition by what it sets, in the
// path=value form of the tables' candidate labels: "speeds[0].speed_kmh=60"
// (km/h; every group's speeds[0], the other speeds entries unchanged), so
// the name does not read as the speed of every user.
func speedsConditionName(v float64) string {
	return "speeds[0].speed_kmh=" + strconv.FormatFloat(v, 'g', 6, 64)
}

// tuneObjectives maps --objective to the proto kind.
var tuneObjectives = map[string]pb.ObjectiveKind{
	"std":    pb.ObjectiveKind_OBJECTIVE_KIND_MIN_SIR_ERROR_STD,
	"outage": pb.ObjectiveKind_OBJECTIVE_KIND_MIN_OUTAGE,
	"power":  pb.ObjectiveKind_OBJECTIVE_KIND_MIN_TX_POWER,
}

func runTune(e *env, fs *flag.FlagSet) action {
	var ov scenarioOverrides
	ov.registerSlotsSeed(fs)
	var axes axisList
	fs.Var(&axes, "axis", "candidate axis `PATH=V1,V2,...`, PATH=FROM:TO:COUNT or PATH=FROM:TO:COUNT:log; repeatable")
	var conds conditionList
	fs.Var(&conds, "condition", "condition `COND` to tune under: NAME[@WEIGHT]:PATH=VALUE[,PATH=VALUE...], weight 1 unless given; repeatable")
	speeds := fs.String("speeds", "", "one condition per speed in km/h (`V1,V2,...`), weight 1 each, named \"speeds[0].speed_kmh=V\": sets speeds[0] of every group, other speeds entries unchanged")
	request := fs.String("request", "", "tuning request `FILE` (protojson TuneRequest in JSON or YAML)")
	objective := fs.String("objective", "", "`OBJECTIVE`: std (SIR error std), outage, or power (mean Tx power with --outage-limit) (default std)")
	outageLimit := fs.Float64("outage-limit", 0, "largest acceptable outage `P` (fraction), required by --objective power; a P above 0.1 also raises the high-outage warning level (0.1) to P")
	blerTol := fs.Float64("bler-tolerance", 0, "accepted relative BLER deviation `X` from target for --objective power (0: 0.2)")
	indiff := fs.Float64("indifference", 0, fmt.Sprintf("difference `D` in the objective's unit below which settings count as equal (0: %g dB for std, %g dB for power, %g %% of the best outage, at least %g, for outage)", tune.DefaultIndifferenceStdDB, tune.DefaultIndifferencePowerDB, 100*tune.DefaultIndifferenceOutageShare, tune.MinIndifferenceOutage))
	confidence := fs.Float64("confidence", 0, "confidence `C` of intervals and the winner's test (0: 0.95)")
	minReps := fs.Int("min-reps", 0, "first-round replications `N` per candidate and condition (0: 2)")
	maxReps := fs.Int("max-reps", 0, "most replications `N` per candidate and condition (0: 32)")
	batchReps := fs.Int("batch-reps", 0, "replications `N` added per round to candidates in contention (0: 2)")
	maxUS := fs.Int64("max-user-slots", 0, "budget `N` of simulated users × slots (0: none)")
	noBaseline := fs.Bool("no-baseline", false, "skip the fixed-power baseline runs (a layout has none: fixed power is single-cell only)")
	var plotSpecs plotList
	fs.Var(&plotSpecs, "plot", "write a plot: `[KIND=]FILE` (.png or .svg; kinds auto, heatmap, steps, axis); repeatable")
	reportFile := fs.String("report", "", "also write the HTML report (verdict, tables, plots) to `FILE.html`")
	var qf sweepQueueFlags
	qf.registerRun(fs, "tune")
	return func(ctx context.Context, args []string) error {
		if err := e.g.checkFormat("table", "csv", "json"); err != nil {
			return err
		}
		if err := checkReportPath(*reportFile); err != nil {
			return err
		}
		if err := plotSpecs.check("auto", "auto", "heatmap", "steps", "axis"); err != nil {
			return err
		}
		req := &pb.TuneRequest{}
		sf, reqFile, err := loadRequest(*request, req, &req.Base, args, &ov)
		if err != nil {
			return err
		}
		req.Axes = append(req.Axes, axes...)
		if len(req.Axes) == 0 {
			return badInputf("no axes: give --axis PATH=VALUES (e.g. --axis inner_loop.step_db=0.5,1,2) or a --request file")
		}
		req.Conditions = append(req.Conditions, conds...)
		if *speeds != "" {
			for _, f := range strings.Split(*speeds, ",") {
				v, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
				if err != nil {
					return badInputf("--speeds: %q is not a speed in km/h", f)
				}
				cd := &pb.Condition{Name: speedsConditionName(v), Weight: 1}
				for g := range req.Base.GetGroups() {
					cd.Overrides = append(cd.Overrides, &pb.Override{Path: fmt.Sprintf("groups[%d].speeds[0].speed_kmh", g),
						Value: &pb.Override_Number{Number: v}})
				}
				req.Conditions = append(req.Conditions, cd)
			}
		}
		if req.Objective == nil {
			req.Objective = &pb.Objective{}
		}
		switch {
		case *objective != "":
			k, ok := tuneObjectives[*objective]
			if !ok {
				return badInputf("--objective %q: must be one of std, outage, power", *objective)
			}
			req.Objective.Kind = k
		case req.Objective.Kind == pb.ObjectiveKind_OBJECTIVE_KIND_UNSPECIFIED && reqFile == nil:
			req.Objective.Kind = pb.ObjectiveKind_OBJECTIVE_KIND_MIN_SIR_ERROR_STD
		}
		setF := func(dst *float64, v float64) {
			if v != 0 {
				*dst = v
			}
		}
		setF(&req.Objective.OutageLimit, *outageLimit)
		if *outageLimit > tune.DefaultOutageWarning && req.Objective.OutageWarning == 0 {
			// An outage the user accepts is not worth a warning: their
			// limit raises the level. (A lower limit leaves it at 10 %:
			// outage above the limit is already said as a miss.)
			req.Objective.OutageWarning = *outageLimit
		}
		setF(&req.Objective.BlerTolerance, *blerTol)
		setF(&req.Objective.IndifferenceZone, *indiff)
		setF(&req.Confidence, *confidence)
		if req.Budget == nil {
			req.Budget = &pb.TuneBudget{}
		}
		for _, b := range []struct {
			dst  *int32
			v    int
			name string
		}{{&req.Budget.MinReplications, *minReps, "min-reps"}, {&req.Budget.MaxReplications, *maxReps, "max-reps"},
			{&req.Budget.BatchReplications, *batchReps, "batch-reps"}} {
			if b.v < 0 || b.v > math.MaxInt32 {
				return badInputf("--%s %d: must be >= 0", b.name, b.v)
			}
			if b.v != 0 {
				*b.dst = int32(b.v)
			}
		}
		if *maxUS != 0 {
			req.Budget.MaxUserSlots = *maxUS
		}
		if *noBaseline {
			req.SkipBaseline = true
		}
		for _, ps := range plotSpecs {
			if err := checkTunePlot(ps, req.Axes); err != nil {
				return err
			}
		}

		out, cl, release, job, err := e.searchSession(ctx, &qf, "tune", service.TuneRequestFromProto(req))
		if err != nil {
			return err
		}
		defer release()
		prog := e.newProgress("user-slots/s")
		rec, err := cl.Tune(ctx, req, searchProgress(prog))
		stopProgress(prog, err == nil)
		if err != nil {
			return searchError(sf, reqFile, job.stopped(ctx, e, err))
		}
		err = e.emit(out, rec, func(w io.Writer) error { return render.TuneCSV(w, rec) },
			func(w io.Writer) { render.TuneTable(w, req, rec) })
		if err != nil {
			return err
		}
		for _, ps := range plotSpecs {
			kind, err := tuneKind(ps, req.Axes)
			if err != nil {
				return err
			}
			if err := plotTune(ps, kind, req.GetBase().GetName(), rec); err != nil {
				return fmt.Errorf("plot %s: %w", ps.file, err)
			}
			if !e.g.quiet {
				fmt.Fprintf(e.stderr, "wrote %s plot to %s\n", kind, ps.file)
			}
		}
		in := htmlreport.Input{Tune: rec, TuneRequest: req, Source: "fadeloop tune"}
		if *reportFile != "" {
			if in.EngineVersion, err = searchEngine(ctx, e, &qf, cl, req.GetBase().GetLayout().GetSites() != 0); err != nil {
				return err
			}
		}
		if err := writeResultReport(e, *reportFile, in); err != nil {
			return err
		}
		return tuneConstraints(rec)
	}
}

// tuneConstraints is constraintsUnmet (exit 4) when the overall verdict or
// a condition's is VERDICT_CONSTRAINTS_UNMET: no candidate meets the
// objective's constraints. The message is the decision's own headline.
func tuneConstraints(rec *pb.Recommendation) error {
	unmet := func(d *pb.Decision) bool {
		return d.GetVerdict() == pb.Verdict_VERDICT_CONSTRAINTS_UNMET || d.GetConstraintsUnmet()
	}
	text := func(d *pb.Decision) string {
		if h := d.GetHeadline(); h != "" {
			return h
		}
		return d.GetReason()
	}
	if d := rec.GetOverall(); unmet(d) {
		return constraintsUnmet{reason: text(d)}
	}
	for _, c := range rec.GetConditions() {
		if d := c.GetDecision(); unmet(d) {
			return constraintsUnmet{reason: "condition " + c.GetName() + ": " + text(d)}
		}
	}
	return nil
}

// searchLocate maps a Tune or Capacity call's field violations to the
// files they came from: with a request file as for sweep --grid; without
// one, to the scenario file's lines (base.…) and to the --axis flags
// (axes…, see axisFlagViolation) when every violation is one of those,
// and as plain "field: rule" lines otherwise (the other fields came from
// other flags).
func searchLocate(sf *client.ScenarioFile, req *client.SourceFile, inv *client.InvalidInputError) error {
	if req != nil {
		return sweepLocate(sf, req, inv)
	}
	var base []client.FieldViolation
	var flags []client.FileViolation
	for _, v := range inv.Violations {
		if fv, ok := axisFlagViolation(v); ok {
			flags = append(flags, fv)
			continue
		}
		if !strings.HasPrefix(v.Field, "base.") || sf == nil {
			return inv
		}
		base = append(base, v)
	}
	if len(inv.Violations) == 0 {
		return inv
	}
	all := &client.ScenarioFileError{}
	if sf != nil {
		all = sf.Locate("base", base)
	}
	all.Violations = append(all.Violations, flags...)
	return all
}
