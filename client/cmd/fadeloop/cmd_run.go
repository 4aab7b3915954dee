package main

import (
	"context"
	_ "embed"
	"flag"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"

	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/render"
	htmlreport "github.com/fadeloop/fadeloop/client/report"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

//go:embed default.yaml
var defaultScenarioYAML []byte

// defaultScenarioName names the built-in scenario in messages.
const defaultScenarioName = "built-in default scenario"

func init() {
	register(&command{
		order:   10,
		name:    "run",
		summary: "run one scenario and print its figures",
		usage:   "[SCENARIO.yaml|.json]",
		details: `Runs one scenario (the built-in default when no file is given; see
"fadeloop example" for it with comments) and prints the aggregate figures,
the figures per distance bin and, with --per-user, per user. Every figure
carries its 95 % interval (a confidence interval from batch means over time
and replications), shown as [low, high] in tables (intervals of proportions
and spreads are asymmetric). With --report FILE.html the HTML report is
written too.

Output formats:
  table  aligned tables for people
  csv    one row per scope: columns scope (aggregate|bin|user), index, group,
         distance_m, min_distance_m, max_distance_m, users, user_slots, then
         for every figure F its value F, then F_ci_low and F_ci_high (its 95 %
         interval); figures in order:
         ` + render.Wrap(strings.Join(render.FigureKeys(), ", "), 62, "         ") + `.
         Probabilities are fractions (0..1), powers dBm, SIR and noise rise dB.
         An empty cell is a value not computed (or an interval not given).
         Multi-cell (layout.sites set): one aggregate row of the layout's
         figures (noise_rise_mean_db and noise_rise_p95_db: mean and 95th
         percentile over cells and slots); the percentiles and
         convergence_time_s are empty (not computed); then other_to_own (f,
         linear) and soft_handover_share (fraction), each with _ci_low and
         _ci_high.
  json   the fadeloop.v1 RunReport message in protojson with proto field
         names, every number and list written out (also at 0).

Plots (--plot [KIND=]FILE.png|.svg, repeatable; kind defaults to traces,
for a multi-cell scenario to map):
  traces     SIR, SIR target and Tx power against time for chosen users
             (--trace-users; default the nearest, the median and the farthest)
  cdf        SIR error distribution per distance bin
  distance   mean Tx power (5th-95th percentile bars) against distance
  map        multi-cell: the layout to scale, users by outage (marker shape
             per group, cells labelled as in the per-cell table)
  map-power  multi-cell: the same, users by mean Tx power

Examples:
  fadeloop run
  fadeloop run testdata/scenarios/near_far_stress.yaml --per-user
  fadeloop run cell.yaml --slots 15000 --seed 7 --format csv --out cell.csv
  fadeloop run cell.yaml --plot traces=traces.png --plot distance=nearfar.svg
  fadeloop --server 127.0.0.1:7443 run cell.json --format json`,
		run: runRun,
	})
}

// scenarioOverrides are the run-setting flags shared by run, sweep and
// bench.
type scenarioOverrides struct {
	slots        int64
	seed         uint64
	seedSet      bool
	replications int
}

func (o *scenarioOverrides) register(fs *flag.FlagSet) {
	o.registerSlotsSeed(fs)
	fs.IntVar(&o.replications, "replications", 0, "run `N` replications instead of the file's (0: keep)")
}

// registerSlotsSeed binds --slots and --seed only (tune and capacity: their
// budget decides the replications).
func (o *scenarioOverrides) registerSlotsSeed(fs *flag.FlagSet) {
	fs.Int64Var(&o.slots, "slots", 0, "run `N` slots per replication, warm-up included, instead of the file's run length; a warm-up of N/2 or more becomes N/5 (0: keep)")
	fs.Func("seed", "use seed `N` instead of the file's run.seed", func(s string) error {
		v, err := strconv.ParseUint(s, 10, 64)
		if err != nil {
			return fmt.Errorf("must be a whole number >= 0")
		}
		o.seed, o.seedSet = v, true
		return nil
	})
}

// apply changes sc's run settings as asked; the warm-up is cut to a fifth
// of the slots when it would not fit.
func (o *scenarioOverrides) apply(sc *pb.Scenario) error {
	if sc.Run == nil {
		sc.Run = &pb.RunSettings{}
	}
	if o.slots < 0 {
		return badInputf("--slots %d: must be >= 0", o.slots)
	}
	if o.slots > 0 {
		sc.Run.Slots = o.slots
		sc.Run.DurationS = 0
		if sc.Run.WarmupSlots >= o.slots/2 {
			sc.Run.WarmupSlots = o.slots / 5
		}
	}
	if o.seedSet {
		sc.Run.Seed = o.seed
	}
	if o.replications < 0 {
		return badInputf("--replications %d: must be >= 0", o.replications)
	}
	if o.replications > 0 {
		sc.Run.Replications = int32(o.replications)
	}
	return nil
}

// loadScenario reads the scenario file named by args (at most one), or the
// built-in default.
func loadScenario(args []string) (*client.ScenarioFile, error) {
	switch len(args) {
	case 0:
		return client.ParseScenario(defaultScenarioName, defaultScenarioYAML)
	case 1:
		sf, err := client.LoadScenarioFile(args[0])
		if err != nil {
			if _, ok := err.(*client.ScenarioFileError); ok {
				return nil, err
			}
			return nil, badInput{err}
		}
		return sf, nil
	}
	return nil, badInputf("give at most one scenario file, got %d arguments: %s", len(args), strings.Join(args, " "))
}

// locate turns the server's field violations into file lines when the
// request carried the file's scenario under prefix; violations of run
// settings that flags replaced (ov) say so.
func locate(sf *client.ScenarioFile, prefix string, ov *scenarioOverrides, err error) error {
	if inv, ok := client.AsInvalidInput(err); ok && sf != nil && len(inv.Violations) > 0 {
		e := sf.Locate(prefix, inv.Violations)
		if flags := ov.flags(); flags != "" {
			e.Annotate("run.", "(run settings after "+flags+")")
		}
		return e
	}
	return err
}

// flags lists the overrides given, as typed ("--slots 5 --replications 2"),
// "" when none.
func (o *scenarioOverrides) flags() string {
	if o == nil {
		return ""
	}
	var f []string
	if o.slots > 0 {
		f = append(f, fmt.Sprintf("--slots %d", o.slots))
	}
	if o.replications > 0 {
		f = append(f, fmt.Sprintf("--replications %d", o.replications))
	}
	if o.seedSet {
		f = append(f, fmt.Sprintf("--seed %d", o.seed))
	}
	return strings.Join(f, " ")
}

func runRun(e *env, fs *flag.FlagSet) action {
	var ov scenarioOverrides
	ov.register(fs)
	perUser := fs.Bool("per-user", false, "also print the figures of every user")
	var plotSpecs plotList
	fs.Var(&plotSpecs, "plot", "write a plot: `[KIND=]FILE` (.png or .svg; kinds traces, cdf, distance; multi-cell: map (users by outage), map-power); repeatable")
	traceUsers := fs.String("trace-users", "", "comma-separated user `INDICES` to trace (default: nearest, median, farthest)")
	tracePoints := fs.Int("trace-points", 1500, "about `N` samples per traced user")
	reportFile := fs.String("report", "", "also write the HTML report (figures, plots, scenario) to `FILE.html`")
	return func(ctx context.Context, args []string) error {
		if err := e.g.checkFormat("table", "csv", "json"); err != nil {
			return err
		}
		if err := checkReportPath(*reportFile); err != nil {
			return err
		}
		// A bare --plot FILE is traces for one cell, the map for a layout
		// (resolved once the scenario is read).
		if err := plotSpecs.check("default", "default", "traces", "cdf", "distance", "map", "map-power"); err != nil {
			return err
		}
		users, err := parseIndexList(*traceUsers)
		if err != nil {
			return badInputf("--trace-users: %v", err)
		}
		if *tracePoints < 10 {
			return badInputf("--trace-points %d: must be >= 10", *tracePoints)
		}
		sf, err := loadScenario(args)
		if err != nil {
			return err
		}
		sc := proto.Clone(sf.Scenario).(*pb.Scenario)
		if err := ov.apply(sc); err != nil {
			return err
		}
		req := &pb.SimulateRequest{Scenario: sc}
		def := "traces"
		if sc.GetLayout().GetSites() != 0 {
			def = "map"
		}
		for i := range plotSpecs {
			if plotSpecs[i].kind == "default" {
				plotSpecs[i].kind = def
			}
		}
		if sc.GetLayout().GetSites() != 0 && plotSpecs.needs("traces", "cdf", "distance") {
			return badInputf("--plot: a multi-cell scenario draws map and map-power (traces, cdf and distance are single-cell plots)")
		}
		if sc.GetLayout().GetSites() == 0 && plotSpecs.needs("map", "map-power") {
			return badInputf("--plot map: the scenario has no layout (set layout.sites; see fadeloop example --multi-cell)")
		}
		out, cl, release, err := e.session()
		if err != nil {
			return err
		}
		defer release()
		// Traces for the plots and the report: single-cell only (the
		// multi-cell engine refuses them; its report draws the map).
		if (plotSpecs.needs("traces", "cdf") || *reportFile != "") && sc.GetLayout().GetSites() == 0 {
			info, err := cl.ServerInfo(ctx)
			if err != nil {
				return err
			}
			req.Traces = traceRequest(sc, info.GetLimits().GetMaxTracedUsers(), *tracePoints, users, plotSpecs.onlyTraces() && *reportFile == "")
		}
		prog := e.newProgress("user-slots/s")
		rep, err := cl.Simulate(ctx, req, func(p *pb.Progress) { prog.update(p.GetFractionDone(), p.GetUserSlotsPerS()) })
		prog.done()
		if err != nil {
			return locate(sf, "scenario", &ov, err)
		}
		err = e.emit(out, rep, func(w io.Writer) error { return render.RunCSV(w, rep) },
			func(w io.Writer) { render.RunTable(w, rep, *perUser) })
		if err != nil {
			return err
		}
		for _, ps := range plotSpecs {
			if err := plotRun(ps, rep, users); err != nil {
				return fmt.Errorf("plot %s: %w", ps.file, err)
			}
			if !e.g.quiet {
				fmt.Fprintf(e.stderr, "wrote %s plot to %s\n", ps.kind, ps.file)
			}
		}
		return writeResultReport(e, *reportFile, htmlreport.Input{Run: rep, Source: "fadeloop run"})
	}
}

// traceRequest asks for traces of about points samples per user (the
// server picks the decimation) of the given users (only traces plots) or,
// when more users than the server traces (maxTraced) exist, of maxTraced
// users spread evenly over the indices plus the given ones.
func traceRequest(sc *pb.Scenario, maxTraced int32, points int, users []int32, onlyTraces bool) *pb.TraceOptions {
	tr := &pb.TraceOptions{SamplesPerUser: int32(min(points, math.MaxInt32))}
	n := 0
	for _, g := range sc.GetGroups() {
		n += int(g.GetCount())
	}
	switch {
	case onlyTraces && len(users) > 0:
		tr.Users = users
	case n > int(maxTraced):
		k := max(1, int(maxTraced)-len(users))
		for i := range k {
			tr.Users = append(tr.Users, int32(i*n/k))
		}
		tr.Users = append(tr.Users, users...)
		slices.Sort(tr.Users)
		tr.Users = slices.Compact(tr.Users)
	}
	return tr
}

func parseIndexList(s string) ([]int32, error) {
	if strings.TrimSpace(s) == "" {
		return nil, nil
	}
	var out []int32
	for _, f := range strings.Split(s, ",") {
		v, err := strconv.ParseInt(strings.TrimSpace(f), 10, 32)
		if err != nil || v < 0 {
			return nil, fmt.Errorf("%q is not a user index (a whole number >= 0)", f)
		}
		out = append(out, int32(v))
	}
	return out, nil
}
