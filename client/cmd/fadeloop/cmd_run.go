package main

import (
	"context"
	_ "embed"
	"encoding/csv"
	"flag"
	"fmt"
	"io"
	"slices"
	"strconv"
	"strings"

	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/client"
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
carries its 95 % confidence interval (batch means over time and
replications), shown as ±half-width in tables.

Output formats:
  table  aligned tables for people
  csv    one row per scope: columns scope (aggregate|bin|user), index, group,
         distance_m, min_distance_m, max_distance_m, users, user_slots, then
         for every figure F its value F, F_ci_low and F_ci_high; figures in
         order: ` + wrap(strings.Join(figureKeys(), ", "), 62, "         ") + `.
         Probabilities are fractions (0..1), powers dBm, SIR and noise rise dB.
  json   the fadeloop.v1 RunReport message in protojson with proto field names.

Plots (--plot [KIND=]FILE.png|.svg, repeatable; kind defaults to traces):
  traces    SIR, SIR target and Tx power against time for chosen users
            (--trace-users; default the nearest, the median and the farthest)
  cdf       SIR error distribution per distance bin
  distance  mean Tx power (5th-95th percentile bars) against distance

Examples:
  fadeloop run
  fadeloop run testdata/scenarios/near_far_stress.yaml --per-user
  fadeloop run cell.yaml --slots 15000 --seed 7 --format csv --out cell.csv
  fadeloop run cell.yaml --plot traces=traces.png --plot distance=nearfar.svg
  fadeloop --server 127.0.0.1:7443 run cell.json --format json`,
		run: runRun,
	})
}

func figureKeys() []string {
	var k []string
	for _, f := range figures {
		k = append(k, f.key)
	}
	return k
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
	fs.Int64Var(&o.slots, "slots", 0, "run `N` slots per replication instead of the file's run length (0: keep)")
	fs.Func("seed", "use seed `N` instead of the file's run.seed", func(s string) error {
		v, err := strconv.ParseUint(s, 10, 64)
		if err != nil {
			return fmt.Errorf("must be a whole number >= 0")
		}
		o.seed, o.seedSet = v, true
		return nil
	})
	fs.IntVar(&o.replications, "replications", 0, "run `N` replications instead of the file's (0: keep)")
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
// request carried the file's scenario under prefix.
func locate(sf *client.ScenarioFile, prefix string, err error) error {
	if inv, ok := client.AsInvalidInput(err); ok && sf != nil && len(inv.Violations) > 0 {
		return sf.Locate(prefix, inv.Violations)
	}
	return err
}

func runRun(ctx context.Context, e *env, args []string) error {
	c := lookup("run")
	fs := e.newFlagSet(c)
	var ov scenarioOverrides
	ov.register(fs)
	perUser := fs.Bool("per-user", false, "also print the figures of every user")
	var plotSpecs plotList
	fs.Var(&plotSpecs, "plot", "write a plot: `[KIND=]FILE` (.png or .svg; kinds traces, cdf, distance; multi-cell: map (users by outage), map-power); repeatable")
	traceUsers := fs.String("trace-users", "", "comma-separated user `INDICES` to trace (default: nearest, median, farthest)")
	tracePoints := fs.Int("trace-points", 1500, "about `N` samples per traced user")
	args, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if err := e.g.checkFormat("table", "csv", "json"); err != nil {
		return err
	}
	if err := plotSpecs.check("traces", "traces", "cdf", "distance", "map", "map-power"); err != nil {
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
	if sc.GetLayout().GetSites() != 0 && plotSpecs.needs("traces", "cdf", "distance") {
		return badInputf("--plot: a multi-cell scenario draws map and map-power (traces, cdf and distance are single-cell plots)")
	}
	if sc.GetLayout().GetSites() == 0 && plotSpecs.needs("map", "map-power") {
		return badInputf("--plot map: the scenario has no layout (set layout.sites; see fadeloop example --multi-cell)")
	}
	if plotSpecs.needs("traces", "cdf") {
		req.Traces = &pb.TraceOptions{DecimationSlots: decimationFor(sc, *tracePoints)}
		switch {
		case plotSpecs.onlyTraces() && len(users) > 0:
			req.Traces.Users = users
		case totalUsers(sc) > maxTracedUsers:
			// The engine traces at most 64 users: take them evenly
			// spread over the user indices.
			n, k := totalUsers(sc), max(1, maxTracedUsers-len(users))
			for i := range k {
				req.Traces.Users = append(req.Traces.Users, int32(i*n/k))
			}
			req.Traces.Users = append(req.Traces.Users, users...)
			slices.Sort(req.Traces.Users)
			req.Traces.Users = slices.Compact(req.Traces.Users)
		}
	}
	out, cl, release, err := e.session()
	if err != nil {
		return err
	}
	defer release()
	prog := e.newProgress("user-slots/s")
	rep, err := cl.Simulate(ctx, req, func(p *pb.Progress) { prog.update(p.GetFractionDone(), p.GetUserSlotsPerS()) })
	prog.done()
	if err != nil {
		return locate(sf, "scenario", err)
	}
	switch e.g.format {
	case "json":
		b, err := marshalJSON(rep)
		if err != nil {
			return err
		}
		out.Writer().Write(b)
	case "csv":
		if err := writeRunCSV(out.Writer(), rep); err != nil {
			return err
		}
	default:
		writeRunTable(out.Writer(), rep, *perUser)
	}
	if err := out.commit(); err != nil {
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
	return nil
}

// maxTracedUsers is the most users one run traces.
const maxTracedUsers = 64

func totalUsers(sc *pb.Scenario) int {
	n := 0
	for _, g := range sc.GetGroups() {
		n += int(g.GetCount())
	}
	return n
}

// decimationFor picks the trace decimation giving about n samples per user.
func decimationFor(sc *pb.Scenario, n int) int32 {
	slots := sc.GetRun().GetSlots() + sc.GetRun().GetWarmupSlots()
	if sc.GetRun().GetSlots() == 0 {
		rate := sc.GetInnerLoop().GetUpdateRateHz()
		slots = int64(sc.GetRun().GetDurationS() * rate)
	}
	d := slots / int64(n)
	return int32(max(1, min(d, 1_000_000)))
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

func groupName(rep *pb.RunReport, g int32) string {
	gs := rep.GetNormalisedScenario().GetGroups()
	if int(g) < len(gs) && gs[g].GetName() != "" {
		return gs[g].GetName()
	}
	return fmt.Sprintf("group %d", g)
}

func writeRunTable(w io.Writer, rep *pb.RunReport, perUser bool) {
	sc := rep.GetNormalisedScenario()
	agg := rep.GetAggregate()
	if sc.GetName() != "" {
		fmt.Fprintln(w, sc.GetName())
	}
	fmt.Fprintf(w, "%d users, %s slots × %d replication(s) after %s warm-up slots, seed %d, engine %s\n",
		agg.GetUsers(), groupDigits(rep.GetSlots()), rep.GetReplications(),
		groupDigits(sc.GetRun().GetWarmupSlots()), rep.GetSeed(), rep.GetEngineVersion())
	fmt.Fprintf(w, "%s user-slots simulated in %.2f s (%s)\n",
		groupDigits(rep.GetSimulatedUserSlots()), rep.GetWallTimeS(), fmtRate(rep.GetUserSlotsPerS(), "user-slots/s"))
	if f := rep.GetFeasibility(); f.GetInfeasible() {
		fmt.Fprintf(w, "\nINFEASIBLE LOAD: %s", f.GetReason())
		if f.GetSpectralRadius() > 0 {
			fmt.Fprintf(w, " (spectral radius %.3f)", f.GetSpectralRadius())
		}
		if len(f.GetUsers()) > 0 {
			fmt.Fprintf(w, "; users %v cannot reach the target", f.GetUsers())
		}
		fmt.Fprintln(w)
	}
	fmt.Fprintln(w)
	t := newTable("figure", "value", "95 % CI").alignRight(1)
	for _, f := range figures {
		e := f.get(agg)
		if e == nil || (rep.GetLayout() != nil && layoutOnlyMissing[f.key]) {
			continue
		}
		t.add(f.label, num(f.scale*e.GetValue(), f.dec),
			"["+num(f.scale*e.GetCiLow(), f.dec)+", "+num(f.scale*e.GetCiHigh(), f.dec)+"]")
	}
	t.write(w)
	writeLayoutTable(w, rep)

	cols := []string{"sir_error_mean_db", "sir_error_std_db", "outage_probability", "achieved_bler",
		"tx_power_mean_dbm", "tx_power_p95_dbm", "max_power_fraction"}
	if bins := rep.GetDistanceBins(); len(bins) > 0 {
		fmt.Fprintln(w)
		fmt.Fprintln(w, "per distance bin (value ±95 % CI half-width):")
		h := []string{"distance (m)", "users"}
		for _, k := range cols {
			h = append(h, shortLabel(k))
		}
		bt := newTable(h...).alignRight(1, 2, 3, 4, 5, 6, 7, 8)
		for _, b := range bins {
			row := []string{num(b.GetMinDistanceM(), 0) + "–" + num(b.GetMaxDistanceM(), 0), strconv.Itoa(int(b.GetFigures().GetUsers()))}
			for _, k := range cols {
				f, _ := figureByKey(k)
				row = append(row, cell(f, f.get(b.GetFigures())))
			}
			bt.add(row...)
		}
		bt.write(w)
	}
	if perUser {
		fmt.Fprintln(w)
		fmt.Fprintln(w, "per user (value ±95 % CI half-width):")
		h := []string{"user", "group", "distance (m)", "speed (km/h)", "path loss (dB)"}
		for _, k := range cols {
			h = append(h, shortLabel(k))
		}
		ut := newTable(h...).alignRight(0, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11)
		for _, u := range rep.GetUsers() {
			row := []string{strconv.Itoa(int(u.GetUser())), groupName(rep, u.GetGroup()), num(u.GetDistanceM(), 0),
				num(u.GetSpeedKmh(), 0), num(u.GetPathLossDb(), 1)}
			for _, k := range cols {
				f, _ := figureByKey(k)
				row = append(row, cell(f, f.get(u.GetFigures())))
			}
			ut.add(row...)
		}
		ut.write(w)
	}
}

// groupDigits writes an integer with thin groups of three: 90 000.
func groupDigits(n int64) string {
	s := strconv.FormatInt(n, 10)
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	var b strings.Builder
	for i, r := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(' ')
		}
		b.WriteRune(r)
	}
	if neg {
		return "-" + b.String()
	}
	return b.String()
}

// runCSVHeader is the header of `run --format csv`.
func runCSVHeader() []string {
	return append([]string{"scope", "index", "group", "distance_m", "min_distance_m", "max_distance_m", "users", "user_slots"},
		figureCSVHeader()...)
}

func writeRunCSV(w io.Writer, rep *pb.RunReport) error {
	cw := csv.NewWriter(w)
	cw.Write(runCSVHeader())
	agg := rep.GetAggregate()
	cw.Write(append([]string{"aggregate", "", "", "", "", "", strconv.Itoa(int(agg.GetUsers())),
		strconv.FormatInt(agg.GetUserSlots(), 10)}, figureCSVCells(agg)...))
	for _, b := range rep.GetDistanceBins() {
		f := b.GetFigures()
		cw.Write(append([]string{"bin", strconv.Itoa(int(b.GetBin())), "", "", csvNum(b.GetMinDistanceM()),
			csvNum(b.GetMaxDistanceM()), strconv.Itoa(int(f.GetUsers())), strconv.FormatInt(f.GetUserSlots(), 10)},
			figureCSVCells(f)...))
	}
	for _, u := range rep.GetUsers() {
		f := u.GetFigures()
		cw.Write(append([]string{"user", strconv.Itoa(int(u.GetUser())), groupName(rep, u.GetGroup()),
			csvNum(u.GetDistanceM()), "", "", strconv.Itoa(int(f.GetUsers())), strconv.FormatInt(f.GetUserSlots(), 10)},
			figureCSVCells(f)...))
	}
	cw.Flush()
	return cw.Error()
}
