package main

import (
	"context"
	"encoding/csv"
	"flag"
	"fmt"
	"io"
	"math"
	"math/bits"
	"os"
	"slices"
	"strconv"
	"strings"

	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/plots"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
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
lower update rate, ...). Each condition also gets a fixed-power baseline.

An axis is PATH=V1,V2,..., PATH=FROM:TO:COUNT (evenly spaced, both ends
included) or PATH=FROM:TO:COUNT:log (geometric). A condition is
NAME[@WEIGHT]:PATH=VALUE[,PATH=VALUE...]; a VALUE that is not a number sets a
text or enum field (e.g. groups[0].profile=EVA). --speeds V1,V2,... is short
for one condition per speed, setting speeds[0].speed_kmh of every group.
A --request file is the protojson form (JSON or YAML) of
fadeloop.v1.TuneRequest; flags add to it and override its objective,
confidence and budget.

Output formats:
  table  the best setting overall and per condition, the runner-up with the
         paired difference and its interval, the reason, the fixed-power
         baseline, every candidate's figures, the effort
  csv    one row per condition × candidate, per condition baseline and per
         overall candidate: scope (condition|baseline|overall), condition,
         weight, candidate, one column per axis (named by its path), status,
         feasible, best (true|false), objective, objective_low,
         objective_high, diff_to_best, diff_low, diff_high, n, then for every
         figure F of sir_error_mean_db, sir_error_std_db, outage_probability,
         achieved_bler, tx_power_mean_dbm, max_power_fraction,
         noise_rise_mean_db its mean F, F_low and F_high (intervals at
         --confidence; probabilities as fractions)
  json   the fadeloop.v1 Recommendation in protojson with proto field names

Plots (--plot [KIND=]FILE.png|.svg, repeatable; kind defaults to auto):
  heatmap  the overall objective over inner_loop.step_db × update_rate_hz
  steps    outage and SIR error std against inner_loop.step_db, one line per
           condition (step the only axis)
  auto     heatmap for step × rate, steps for step alone

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
	register(&command{
		order:   31,
		name:    "capacity",
		summary: "find the most users a setting carries at an outage limit, beside the pole capacity",
		usage:   "[SCENARIO.yaml|.json]",
		details: `Bisects the user count of one group (--group) of the scenario (the file, or
the built-in default) for the largest count whose mean aggregate outage
over --replications stays at or below --outage-limit, with the same seeds at
every count (common random numbers). Without --max-count the search doubles
upward from --min-count until a count fails. The analytic pole capacity
(Gilhousen et al. 1991) and the pole of the engine's own interference
equation are printed beside the simulated figure. The group's placement
must be uniform. Without --max-count the worst case (doubling up to the
engine's limit of 4096 users) is what the server's cost bound is checked
against, and it often exceeds it: give --max-count or --max-user-slots.

A --request file is the protojson form (JSON or YAML) of
fadeloop.v1.CapacityRequest; flags override its fields.

Output formats:
  table  the capacity, the pole estimates with their inputs, every
         evaluated count with its figures, the reason and the effort
  csv    one row per evaluated count: count, total_users, pass (true|false),
         n, then for every figure F of sir_error_mean_db, sir_error_std_db,
         outage_probability, achieved_bler, tx_power_mean_dbm,
         max_power_fraction, noise_rise_mean_db its mean F, F_low and F_high
  json   the fadeloop.v1 CapacityResult in protojson with proto field names

Examples:
  fadeloop capacity --outage-limit 0.2 --max-count 256
  fadeloop capacity testdata/scenarios/indoor_outer_loop.yaml --outage-limit 0.05 --max-count 256
  fadeloop capacity cell.yaml --group 1 --outage-limit 0.02 --max-count 200 \
      --replications 8 --format csv --out capacity.csv`,
		run: runCapacity,
	})
}

// runSettingFlags are the run-setting flags of tune and capacity (the
// budget decides the replications, so there is no --replications).
func runSettingFlags(fs *flag.FlagSet, ov *scenarioOverrides) {
	fs.Int64Var(&ov.slots, "slots", 0, "run `N` slots per replication instead of the file's run length (0: keep)")
	fs.Func("seed", "use seed `N` instead of the file's run.seed", func(s string) error {
		v, err := strconv.ParseUint(s, 10, 64)
		if err != nil {
			return fmt.Errorf("must be a whole number >= 0")
		}
		ov.seed, ov.seedSet = v, true
		return nil
	})
}

// conditionList is the repeatable --condition flag.
type conditionList []*pb.Condition

func (c *conditionList) String() string { return fmt.Sprint(len(*c), " conditions") }

func (c *conditionList) Set(v string) error {
	head, body, ok := strings.Cut(v, ":")
	if !ok || strings.TrimSpace(head) == "" || strings.TrimSpace(body) == "" {
		return fmt.Errorf("want NAME[@WEIGHT]:PATH=VALUE[,PATH=VALUE...]")
	}
	cd := &pb.Condition{Name: strings.TrimSpace(head), Weight: 1}
	if name, w, ok := strings.Cut(head, "@"); ok {
		x, err := strconv.ParseFloat(strings.TrimSpace(w), 64)
		if err != nil {
			return fmt.Errorf("weight %q is not a number", w)
		}
		cd.Name, cd.Weight = strings.TrimSpace(name), x
	}
	for _, kv := range strings.Split(body, ",") {
		p, val, ok := strings.Cut(kv, "=")
		p, val = strings.TrimSpace(p), strings.TrimSpace(val)
		if !ok || p == "" || val == "" {
			return fmt.Errorf("override %q: want PATH=VALUE", kv)
		}
		o := &pb.Override{Path: p}
		if x, err := strconv.ParseFloat(val, 64); err == nil {
			o.Value = &pb.Override_Number{Number: x}
		} else {
			o.Value = &pb.Override_Text{Text: val}
		}
		cd.Overrides = append(cd.Overrides, o)
	}
	*c = append(*c, cd)
	return nil
}

// tuneObjectives maps --objective to the proto kind.
var tuneObjectives = map[string]pb.ObjectiveKind{
	"std":    pb.ObjectiveKind_OBJECTIVE_KIND_MIN_SIR_ERROR_STD,
	"outage": pb.ObjectiveKind_OBJECTIVE_KIND_MIN_OUTAGE,
	"power":  pb.ObjectiveKind_OBJECTIVE_KIND_MIN_TX_POWER,
}

// readRequestFile parses a protojson request file (JSON or YAML) into m.
func readRequestFile(path string, m proto.Message) (*client.SourceFile, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, badInput{err}
	}
	return client.ParseMessage(path, data, m)
}

func runTune(e *env, fs *flag.FlagSet) action {
	var ov scenarioOverrides
	runSettingFlags(fs, &ov)
	var axes axisList
	fs.Var(&axes, "axis", "candidate axis `PATH=V1,V2,...`, PATH=FROM:TO:COUNT or PATH=FROM:TO:COUNT:log; repeatable")
	var conds conditionList
	fs.Var(&conds, "condition", "condition `NAME[@WEIGHT]:PATH=VALUE[,PATH=VALUE...]`; repeatable")
	speeds := fs.String("speeds", "", "one condition per speed in km/h (`V1,V2,...`), weight 1 each")
	request := fs.String("request", "", "tuning request `FILE` (protojson TuneRequest in JSON or YAML)")
	objective := fs.String("objective", "", "`OBJECTIVE`: std (SIR error std), outage, or power (mean Tx power with --outage-limit) (default std)")
	outageLimit := fs.Float64("outage-limit", 0, "largest acceptable outage `P` (fraction) for --objective power")
	blerTol := fs.Float64("bler-tolerance", 0, "accepted relative BLER deviation `X` from target for --objective power (0: 0.2)")
	indiff := fs.Float64("indifference", 0, "difference `D` in the objective's unit below which settings count as equal (0: default)")
	confidence := fs.Float64("confidence", 0, "confidence `C` of intervals and the winner's test (0: 0.95)")
	minReps := fs.Int("min-reps", 0, "first-round replications `N` per candidate and condition (0: 2)")
	maxReps := fs.Int("max-reps", 0, "most replications `N` per candidate and condition (0: 32)")
	batchReps := fs.Int("batch-reps", 0, "replications `N` added per round to candidates in contention (0: 2)")
	maxUS := fs.Int64("max-user-slots", 0, "budget `N` of simulated users × slots (0: none)")
	noBaseline := fs.Bool("no-baseline", false, "skip the fixed-power baseline runs")
	var plotSpecs plotList
	fs.Var(&plotSpecs, "plot", "write a plot: `[KIND=]FILE` (.png or .svg; kinds auto, heatmap, steps); repeatable")
	return func(ctx context.Context, args []string) error {
		var err error
		if err := e.g.checkFormat("table", "csv", "json"); err != nil {
			return err
		}
		if err := plotSpecs.check("auto", "auto", "heatmap", "steps"); err != nil {
			return err
		}
		req := &pb.TuneRequest{}
		var reqFile *client.SourceFile
		if *request != "" {
			if reqFile, err = readRequestFile(*request, req); err != nil {
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
			return badInputf("no axes: give --axis PATH=VALUES (e.g. --axis inner_loop.step_db=0.5,1,2) or a --request file")
		}
		req.Conditions = append(req.Conditions, conds...)
		if *speeds != "" {
			for _, f := range strings.Split(*speeds, ",") {
				v, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
				if err != nil {
					return badInputf("--speeds: %q is not a speed in km/h", f)
				}
				cd := &pb.Condition{Name: strconv.FormatFloat(v, 'g', 6, 64) + " km/h", Weight: 1}
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

		out, cl, release, err := e.session()
		if err != nil {
			return err
		}
		defer release()
		worst := worstRuns(req)
		prog := e.newProgress("user-slots/s")
		rec, err := cl.Tune(ctx, req, func(p *pb.SearchProgress) {
			prog.update(float64(p.GetReplicationsDone())/worst, float64(p.GetUserSlotsDone())/math.Max(p.GetElapsedS(), 1e-9))
		})
		prog.done()
		if err != nil {
			if inv, ok := client.AsInvalidInput(err); ok {
				return searchLocate(sf, reqFile, inv)
			}
			return err
		}
		switch e.g.format {
		case "json":
			b, err := marshalJSON(rec)
			if err != nil {
				return err
			}
			out.Writer().Write(b)
		case "csv":
			if err := writeTuneCSV(out.Writer(), rec); err != nil {
				return err
			}
		default:
			writeTuneTable(out.Writer(), req, rec)
		}
		if err := out.commit(); err != nil {
			return err
		}
		for _, ps := range plotSpecs {
			if err := plotTune(ps, req.GetBase().GetName(), req.Axes, rec); err != nil {
				return fmt.Errorf("plot %s: %w", ps.file, err)
			}
			if !e.g.quiet {
				fmt.Fprintf(e.stderr, "wrote %s plot to %s\n", ps.kind, ps.file)
			}
		}
		return nil
	}
}

// searchLocate maps a Tune or Capacity call's field violations to the
// files they came from: with a request file as for sweep --grid; without
// one, to the scenario file's lines when every violation is in the base
// scenario, and as plain "field: rule" lines otherwise (the other fields
// came from flags).
func searchLocate(sf *client.ScenarioFile, req *client.SourceFile, inv *client.InvalidInputError) error {
	if req != nil {
		return sweepLocate(sf, req, inv)
	}
	for _, v := range inv.Violations {
		if !strings.HasPrefix(v.Field, "base.") {
			return inv
		}
	}
	if sf == nil || len(inv.Violations) == 0 {
		return inv
	}
	return sf.Locate("base", inv.Violations)
}

// worstRuns is the most runs the search can take (every candidate under
// every condition at max_replications, plus the baselines): the progress
// bar's whole; the sequential procedure usually stops well before.
func worstRuns(req *pb.TuneRequest) float64 {
	k := 1.0
	for _, a := range req.GetAxes() {
		n := len(a.GetValues())
		if n == 0 {
			n = int(a.GetCount())
		}
		k *= float64(max(n, 1))
	}
	c := float64(max(len(req.GetConditions()), 1))
	r := float64(req.GetBudget().GetMaxReplications())
	if r == 0 {
		r = math.Max(32, float64(req.GetBudget().GetMinReplications()))
	}
	w := k * c * r
	if !req.GetSkipBaseline() {
		w += c * r
	}
	return w
}

// pointLabel is "step_db=0.5, update_rate_hz=1500" ("base setting" without
// axes).
func pointLabel(p *pb.GridPoint) string {
	if p == nil || len(p.GetCoords()) == 0 {
		return "base setting"
	}
	var parts []string
	for _, c := range p.GetCoords() {
		name := c.GetPath()
		if i := strings.LastIndexByte(name, '.'); i >= 0 {
			name = name[i+1:]
		}
		parts = append(parts, name+"="+strconv.FormatFloat(c.GetValue(), 'g', 6, 64))
	}
	return strings.Join(parts, ", ")
}

// objectiveUnit returns the table scale, decimals and unit of an objective.
func objectiveUnit(k pb.ObjectiveKind) (scale float64, dec int, unit, name string) {
	switch k {
	case pb.ObjectiveKind_OBJECTIVE_KIND_MIN_OUTAGE:
		return 100, 3, "%", "outage"
	case pb.ObjectiveKind_OBJECTIVE_KIND_MIN_TX_POWER:
		return 1, 2, "dBm", "mean Tx power"
	}
	return 1, 3, "dB", "SIR error std"
}

// estCell is "1.98 ±0.03" (larger side of the interval), scaled.
func estCell(e *pb.ReplicationEstimate, scale float64, dec int) string {
	if e == nil {
		return "–"
	}
	v, lo, hi := scale*e.GetMean(), scale*e.GetLow(), scale*e.GetHigh()
	if e.GetN() < 2 {
		return num(v, dec)
	}
	return num(v, dec) + " ±" + num(math.Max(v-lo, hi-v), dec)
}

// interval is "[lo, hi]", scaled.
func interval(e *pb.ReplicationEstimate, scale float64, dec int) string {
	return "[" + num(scale*e.GetLow(), dec) + ", " + num(scale*e.GetHigh(), dec) + "]"
}

var statusNames = map[pb.CandidateStatus]string{
	pb.CandidateStatus_CANDIDATE_STATUS_CONTENDING: "contending",
	pb.CandidateStatus_CANDIDATE_STATUS_DROPPED:    "dropped",
	pb.CandidateStatus_CANDIDATE_STATUS_EQUIVALENT: "equivalent",
}

// verdictLine describes a decision in one line.
func verdictLine(d *pb.Decision, cands []*pb.GridPoint) string {
	s := pointLabel(d.GetSetting())
	switch {
	case d.GetDeclared():
		s += "  (declared winner)"
	case len(d.GetTieSet()) > 1:
		s += fmt.Sprintf("  (tie of %d, picked by the tie rule)", len(d.GetTieSet()))
	default:
		s += "  (not separated from the runner-up at this budget)"
	}
	if d.GetConstraintsUnmet() {
		s += "  [no candidate met the constraints; ranked by outage]"
	}
	return s
}

// runnerUpLine is the runner-up with the paired difference and interval.
func runnerUpLine(d *pb.Decision, cands []*pb.GridPoint, k pb.ObjectiveKind, conf float64) string {
	ru := d.GetRunnerUp()
	if ru < 0 || int(ru) >= len(cands) {
		return "none (one candidate)"
	}
	scale, dec, unit, _ := objectiveUnit(k)
	if d.GetConstraintsUnmet() {
		scale, dec, unit = 100, 3, "%"
	}
	ev := d.GetEvidence()
	than := ""
	if l := d.GetLeader(); l != d.GetBest() && l >= 0 && int(l) < len(cands) {
		than = " than the leader " + pointLabel(cands[l]) + " (best point estimate)"
	}
	line := fmt.Sprintf("%s: %s %s worse%s, %g %% interval %s, %d paired replications", pointLabel(cands[ru]),
		num(scale*ev.GetMean(), dec), unit, than, 100*conf, interval(ev, scale, dec), ev.GetN())
	return line
}

func writeTuneTable(w io.Writer, req *pb.TuneRequest, rec *pb.Recommendation) {
	k := rec.GetObjective().GetKind()
	scale, dec, unit, oname := objectiveUnit(k)
	conf := rec.GetConfidence()
	cands := rec.GetCandidates()
	if n := req.GetBase().GetName(); n != "" {
		fmt.Fprintln(w, n)
	}
	fmt.Fprintf(w, "minimise %s; %d candidates × %d conditions; confidence %g %%; seed %d\n\n",
		oname, len(cands), len(rec.GetConditions()), 100*conf, rec.GetSeed())
	ov := rec.GetOverall()
	fmt.Fprintf(w, "Best overall:   %s\n", verdictLine(ov, cands))
	if len(rec.GetConditions()) > 1 {
		var ws []string
		for _, c := range rec.GetConditions() {
			ws = append(ws, fmt.Sprintf("%s (weight %g)", c.GetName(), c.GetWeight()))
		}
		fmt.Fprintf(w, "                weighted over %s\n", strings.Join(ws, ", "))
	}
	fmt.Fprintf(w, "Runner-up:      %s\n", runnerUpLine(ov, cands, k, conf))
	if len(ov.GetTieSet()) > 1 {
		var ts []string
		for _, i := range ov.GetTieSet() {
			ts = append(ts, pointLabel(cands[i]))
		}
		fmt.Fprintf(w, "Tie set:        %s\n", strings.Join(ts, "; "))
	}
	fmt.Fprintf(w, "Why:            %s\n", wrap(ov.GetReason(), 62, strings.Repeat(" ", 16)))
	fmt.Fprintf(w, "Tie rule:       %s\n\n", wrap(rec.GetTieRule(), 62, strings.Repeat(" ", 16)))

	t := newTable("condition", "weight", "best setting", "verdict", oname+" ("+unit+")", "runner-up diff ("+unit+")",
		"fixed power", "gain over fixed", "f_D·T")
	t.alignRight(1, 4, 5, 6, 7, 8)
	for _, c := range rec.GetConditions() {
		d := c.GetDecision()
		verdict := "winner"
		switch {
		case d.GetDeclared():
		case len(d.GetTieSet()) > 1:
			verdict = fmt.Sprintf("tie of %d", len(d.GetTieSet()))
		default:
			verdict = "not separated"
		}
		var best *pb.CandidateResult
		for _, cr := range c.GetCandidates() {
			if cr.GetCandidate() == d.GetBest() {
				best = cr
			}
		}
		diff := "–"
		if d.GetRunnerUp() >= 0 {
			diff = num(scale*d.GetEvidence().GetMean(), dec) + " " + interval(d.GetEvidence(), scale, dec)
		}
		base, gain := "–", "–"
		if b := c.GetBaseline(); b != nil {
			gs, gd := 100.0, 3
			bf := b.GetFigures().GetOutageProbability()
			if k == pb.ObjectiveKind_OBJECTIVE_KIND_MIN_SIR_ERROR_STD {
				gs, gd, bf = 1, 3, b.GetFigures().GetSirErrorStdDb()
			}
			base = estCell(bf, gs, gd)
			gain = num(gs*b.GetGain().GetMean(), gd)
			if b.GetBarelyHelps() {
				gain += " (barely helps)"
			}
		}
		t.add(c.GetName(), strconv.FormatFloat(c.GetWeight(), 'g', 4, 64), pointLabel(d.GetSetting()), verdict,
			estCell(best.GetObjective(), scale, dec), diff, base, gain, num(c.GetDopplerProductMax(), 4))
	}
	t.write(w)
	fmt.Fprintln(w)
	for _, c := range rec.GetConditions() {
		fmt.Fprintf(w, "Condition %s: %s\n", c.GetName(), wrap(c.GetDecision().GetReason(), 66, "  "))
		ct := newTable("  #", "setting", oname+" ("+unit+")", "diff to best", "SIR err std (dB)", "outage (%)",
			"BLER (%)", "Tx mean (dBm)", "noise rise (dB)", "n", "status")
		ct.alignRight(0, 2, 3, 4, 5, 6, 7, 8, 9)
		for _, cr := range c.GetCandidates() {
			f := cr.GetFigures()
			mark := ""
			if cr.GetCandidate() == c.GetDecision().GetBest() {
				mark = "*"
			}
			status := statusNames[cr.GetStatus()]
			if !cr.GetFeasible() {
				status += ", infeasible"
			}
			ct.add(mark+strconv.Itoa(int(cr.GetCandidate())), pointLabel(cands[cr.GetCandidate()]),
				estCell(cr.GetObjective(), scale, dec), num(scale*cr.GetDiffToBest().GetMean(), dec),
				estCell(f.GetSirErrorStdDb(), 1, 3), estCell(f.GetOutageProbability(), 100, 3),
				estCell(f.GetAchievedBler(), 100, 2), estCell(f.GetTxPowerMeanDbm(), 1, 2),
				estCell(f.GetNoiseRiseMeanDb(), 1, 2), strconv.Itoa(int(cr.GetObjective().GetN())), status)
		}
		ct.write(w)
		fmt.Fprintln(w)
	}
	ef := rec.GetEffort()
	fmt.Fprintf(w, "Effort: %d candidate runs + %d fixed-power runs in %d rounds (at most %d replications of one candidate);\n",
		ef.GetReplications(), ef.GetBaselineReplications(), ef.GetStages(), ef.GetMaxReplicationsUsed())
	ratio := ""
	if ef.GetEqualAllocationReplications() > 0 {
		ratio = fmt.Sprintf(" (%.0f %% of it)", 100*float64(ef.GetReplications())/float64(ef.GetEqualAllocationReplications()))
	}
	fmt.Fprintf(w, "        equal allocation to the same precision: %d runs%s; %s user-slots in %.2f s",
		ef.GetEqualAllocationReplications(), ratio, groupDigits(ef.GetUserSlots()), ef.GetWallTimeS())
	if ef.GetBudgetExhausted() {
		fmt.Fprint(w, "; stopped by the budget")
	}
	fmt.Fprintln(w)
}

// searchFigures are the figures of the tune and capacity CSV files.
var searchFigures = []struct {
	key string
	get func(*pb.TuneFigures) *pb.ReplicationEstimate
}{
	{"sir_error_mean_db", (*pb.TuneFigures).GetSirErrorMeanDb},
	{"sir_error_std_db", (*pb.TuneFigures).GetSirErrorStdDb},
	{"outage_probability", (*pb.TuneFigures).GetOutageProbability},
	{"achieved_bler", (*pb.TuneFigures).GetAchievedBler},
	{"tx_power_mean_dbm", (*pb.TuneFigures).GetTxPowerMeanDbm},
	{"max_power_fraction", (*pb.TuneFigures).GetMaxPowerFraction},
	{"noise_rise_mean_db", (*pb.TuneFigures).GetNoiseRiseMeanDb},
}

func searchFigureHeader() []string {
	var h []string
	for _, f := range searchFigures {
		h = append(h, f.key, f.key+"_low", f.key+"_high")
	}
	return h
}

func searchFigureCells(fs *pb.TuneFigures) []string {
	var c []string
	for _, f := range searchFigures {
		if fs == nil {
			c = append(c, "", "", "")
			continue
		}
		e := f.get(fs)
		c = append(c, csvNum(e.GetMean()), csvNum(e.GetLow()), csvNum(e.GetHigh()))
	}
	return c
}

func estCells(e *pb.ReplicationEstimate) []string {
	if e == nil {
		return []string{"", "", ""}
	}
	return []string{csvNum(e.GetMean()), csvNum(e.GetLow()), csvNum(e.GetHigh())}
}

func writeTuneCSV(w io.Writer, rec *pb.Recommendation) error {
	cw := csv.NewWriter(w)
	cands := rec.GetCandidates()
	h := []string{"scope", "condition", "weight", "candidate"}
	var paths []string
	if len(cands) > 0 {
		for _, c := range cands[0].GetCoords() {
			paths = append(paths, c.GetPath())
		}
	}
	h = append(h, paths...)
	h = append(h, "status", "feasible", "best", "objective", "objective_low", "objective_high",
		"diff_to_best", "diff_low", "diff_high", "n")
	cw.Write(append(h, searchFigureHeader()...))
	coords := func(k int32) []string {
		var out []string
		if k >= 0 && int(k) < len(cands) {
			for _, c := range cands[k].GetCoords() {
				out = append(out, csvNum(c.GetValue()))
			}
		}
		for len(out) < len(paths) {
			out = append(out, "")
		}
		return out
	}
	row := func(scope, cond string, weight float64, cr *pb.CandidateResult, best int32) {
		r := []string{scope, cond, csvNum(weight), strconv.Itoa(int(cr.GetCandidate()))}
		r = append(r, coords(cr.GetCandidate())...)
		r = append(r, strings.TrimPrefix(strings.ToLower(cr.GetStatus().String()), "candidate_status_"),
			strconv.FormatBool(cr.GetFeasible()), strconv.FormatBool(cr.GetCandidate() == best))
		r = append(r, estCells(cr.GetObjective())...)
		r = append(r, estCells(cr.GetDiffToBest())...)
		r = append(r, strconv.Itoa(int(cr.GetObjective().GetN())))
		cw.Write(append(r, searchFigureCells(cr.GetFigures())...))
	}
	for _, c := range rec.GetConditions() {
		for _, cr := range c.GetCandidates() {
			row("condition", c.GetName(), c.GetWeight(), cr, c.GetDecision().GetBest())
		}
		if b := c.GetBaseline(); b != nil {
			r := []string{"baseline", c.GetName(), csvNum(c.GetWeight()), ""}
			r = append(r, coords(-1)...)
			r = append(r, "", "", "false", "", "", "", "", "", "", strconv.Itoa(int(b.GetFigures().GetSirErrorStdDb().GetN())))
			cw.Write(append(r, searchFigureCells(b.GetFigures())...))
		}
	}
	for _, cr := range rec.GetOverallCandidates() {
		row("overall", "", 1, cr, rec.GetOverall().GetBest())
	}
	cw.Flush()
	return cw.Error()
}

// tuneAxisPaths lists the paths of the axes.
func tuneAxisPaths(axes []*pb.SweepAxis) map[string]int {
	paths := map[string]int{}
	for _, a := range axes {
		paths[a.GetPath()]++
	}
	return paths
}

func autoTunePlot(axes []*pb.SweepAxis) string {
	paths := tuneAxisPaths(axes)
	if len(axes) == 2 && paths[stepPath] == 1 && paths[ratePath] == 1 {
		return "heatmap"
	}
	return "steps"
}

// checkTunePlot rejects, before any work, a plot the axes cannot give.
func checkTunePlot(ps plotSpec, axes []*pb.SweepAxis) error {
	kind := ps.kind
	if kind == "auto" {
		kind = autoTunePlot(axes)
	}
	paths := tuneAxisPaths(axes)
	switch kind {
	case "heatmap":
		if len(axes) != 2 || paths[stepPath] != 1 || paths[ratePath] != 1 {
			return badInputf("--plot heatmap=%s needs exactly the axes %s and %s", ps.file, stepPath, ratePath)
		}
	case "steps":
		if len(axes) != 1 || paths[stepPath] != 1 {
			return badInputf("--plot steps=%s needs %s as the only axis (one line per condition)", ps.file, stepPath)
		}
	}
	return nil
}

// plotTune draws one plot of a recommendation.
func plotTune(ps plotSpec, title string, axes []*pb.SweepAxis, rec *pb.Recommendation) error {
	kind := ps.kind
	if kind == "auto" {
		kind = autoTunePlot(axes)
	}
	if title == "" {
		title = "fadeloop tune"
	}
	cands := rec.GetCandidates()
	coord := func(k int32, path string) float64 {
		for _, c := range cands[k].GetCoords() {
			if c.GetPath() == path {
				return c.GetValue()
			}
		}
		return math.NaN()
	}
	var (
		fig *plots.Figure
		err error
	)
	switch kind {
	case "heatmap":
		scale, _, unit, name := objectiveUnit(rec.GetObjective().GetKind())
		var steps, rates []float64
		for i := range cands {
			steps = append(steps, coord(int32(i), stepPath))
			rates = append(rates, coord(int32(i), ratePath))
		}
		slices.Sort(steps)
		slices.Sort(rates)
		g := plots.ObjectiveGrid{Objective: name + " (" + unit + ")", StepDB: slices.Compact(steps),
			UpdateRateHz: slices.Compact(rates), LowerIsBetter: true}
		if len(rec.GetConditions()) > 1 {
			g.Objective = "weighted " + g.Objective
		}
		g.Value = make([][]float64, len(g.UpdateRateHz))
		for r := range g.Value {
			g.Value[r] = make([]float64, len(g.StepDB))
			for c := range g.Value[r] {
				g.Value[r][c] = math.NaN()
			}
		}
		for _, cr := range rec.GetOverallCandidates() {
			col := slices.Index(g.StepDB, coord(cr.GetCandidate(), stepPath))
			row := slices.Index(g.UpdateRateHz, coord(cr.GetCandidate(), ratePath))
			if col >= 0 && row >= 0 {
				g.Value[row][col] = scale * cr.GetObjective().GetMean()
			}
		}
		fig, err = plots.HeatMap(g.Objective+" over step × update rate — "+title, g)
	case "steps":
		var ls []plots.StepLine
		for _, c := range rec.GetConditions() {
			l := plots.StepLine{Label: c.GetName()}
			crs := slices.Clone(c.GetCandidates())
			slices.SortFunc(crs, func(a, b *pb.CandidateResult) int {
				return int(math.Copysign(1, coord(a.GetCandidate(), stepPath)-coord(b.GetCandidate(), stepPath)))
			})
			for _, cr := range crs {
				f := cr.GetFigures()
				o, s := f.GetOutageProbability(), f.GetSirErrorStdDb()
				l.StepDB = append(l.StepDB, coord(cr.GetCandidate(), stepPath))
				l.OutagePct = append(l.OutagePct, 100*o.GetMean())
				l.OutageLowPct = append(l.OutageLowPct, 100*o.GetLow())
				l.OutageHighPct = append(l.OutageHighPct, 100*o.GetHigh())
				l.ErrorStdDB = append(l.ErrorStdDB, s.GetMean())
				l.ErrorStdLowDB = append(l.ErrorStdLowDB, s.GetLow())
				l.ErrorStdHighDB = append(l.ErrorStdHighDB, s.GetHigh())
			}
			ls = append(ls, l)
		}
		fig, err = plots.StepSensitivity("Outage and SIR error spread against step size per condition — "+title, ls)
	default:
		return badInputf("unknown plot kind %q", kind)
	}
	if err != nil {
		return err
	}
	return fig.Save(ps.file)
}

func runCapacity(e *env, fs *flag.FlagSet) action {
	var ov scenarioOverrides
	runSettingFlags(fs, &ov)
	request := fs.String("request", "", "capacity request `FILE` (protojson CapacityRequest in JSON or YAML)")
	group := fs.Int("group", -1, "index `G` of the group whose count is scaled (default 0)")
	outage := fs.Float64("outage-limit", 0, "largest acceptable aggregate outage `P` (fraction, e.g. 0.05); required")
	minCount := fs.Int("min-count", 0, "smallest group count `N` tried (0: 1)")
	maxCount := fs.Int("max-count", 0, "largest group count `N` tried (0: double upward until a count fails)")
	reps := fs.Int("replications", 0, "replications `N` per evaluated count (0: 4)")
	confidence := fs.Float64("confidence", 0, "confidence `C` of the intervals (0: 0.95)")
	maxUS := fs.Int64("max-user-slots", 0, "budget `N` of simulated users × slots (0: none)")
	return func(ctx context.Context, args []string) error {
		var err error
		if err := e.g.checkFormat("table", "csv", "json"); err != nil {
			return err
		}
		req := &pb.CapacityRequest{}
		var reqFile *client.SourceFile
		if *request != "" {
			if reqFile, err = readRequestFile(*request, req); err != nil {
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
		for _, x := range []struct {
			dst  *int32
			v    int
			name string
		}{{&req.MinCount, *minCount, "min-count"}, {&req.MaxCount, *maxCount, "max-count"}, {&req.Replications, *reps, "replications"}} {
			if x.v < 0 || x.v > math.MaxInt32 {
				return badInputf("--%s %d: must be >= 0", x.name, x.v)
			}
			if x.v != 0 {
				*x.dst = int32(x.v)
			}
		}
		if *group >= 0 {
			if *group > math.MaxInt32 {
				return badInputf("--group %d: too large", *group)
			}
			req.Group = int32(*group)
		}
		if *outage != 0 {
			req.OutageLimit = *outage
		}
		if req.OutageLimit == 0 {
			return badInputf("--outage-limit is required (the largest acceptable outage, e.g. 0.05)")
		}
		if *confidence != 0 {
			req.Confidence = *confidence
		}
		if *maxUS != 0 {
			req.MaxUserSlots = *maxUS
		}
		out, cl, release, err := e.session()
		if err != nil {
			return err
		}
		defer release()
		hi := int(req.GetMaxCount())
		if hi == 0 {
			hi = 4096
		}
		r := float64(req.GetReplications())
		if r == 0 {
			r = 4
		}
		worst := float64(2+2*bits.Len(uint(hi))) * r
		prog := e.newProgress("user-slots/s")
		res, err := cl.Capacity(ctx, req, func(p *pb.SearchProgress) {
			prog.update(float64(p.GetReplicationsDone())/worst, float64(p.GetUserSlotsDone())/math.Max(p.GetElapsedS(), 1e-9))
		})
		prog.done()
		if err != nil {
			if inv, ok := client.AsInvalidInput(err); ok {
				return searchLocate(sf, reqFile, inv)
			}
			return err
		}
		switch e.g.format {
		case "json":
			b, err := marshalJSON(res)
			if err != nil {
				return err
			}
			out.Writer().Write(b)
		case "csv":
			if err := writeCapacityCSV(out.Writer(), res); err != nil {
				return err
			}
		default:
			writeCapacityTable(out.Writer(), req, res)
		}
		return out.commit()
	}
}

func writeCapacityTable(w io.Writer, req *pb.CapacityRequest, res *pb.CapacityResult) {
	if n := req.GetBase().GetName(); n != "" {
		fmt.Fprintln(w, n)
	}
	g := req.GetGroup()
	gname := ""
	if int(g) < len(req.GetBase().GetGroups()) {
		gname = fmt.Sprintf(" (%q)", req.GetBase().GetGroups()[g].GetName())
	}
	limit := 100 * req.GetOutageLimit()
	switch {
	case res.GetBelowRange():
		fmt.Fprintf(w, "Capacity of group %d%s at outage <= %g %%: below the smallest count tried\n", g, gname, limit)
	case res.GetAtRangeTop():
		fmt.Fprintf(w, "Capacity of group %d%s at outage <= %g %%: at least %d in the group, %d users in all (the largest count tried passes)\n",
			g, gname, limit, res.GetCount(), res.GetTotalUsers())
	default:
		fmt.Fprintf(w, "Capacity of group %d%s at outage <= %g %%: %d in the group, %d users in all\n",
			g, gname, limit, res.GetCount(), res.GetTotalUsers())
	}
	if res.GetPoleError() == "" {
		pp := res.GetPoleParams()
		fmt.Fprintf(w, "Pole capacity (Gilhousen et al. 1991): %.1f users  (W/R = %.1f, Eb/I0 = %g dB, activity %g, f = %g, %g sector)\n",
			res.GetPole(), pp.GetChipRateHz()/pp.GetBitRateBps(), pp.GetEbI0Db(), pp.GetActivityFactor(), pp.GetOtherCellRatio(), pp.GetSectors())
		fmt.Fprintf(w, "Pole of the engine's interference equation: %.1f users\n", res.GetModelPole())
	} else {
		fmt.Fprintf(w, "Pole capacity: not available (%s)\n", res.GetPoleError())
	}
	fmt.Fprintln(w)
	t := newTable("count", "users", "outage (%)", "pass", "SIR err std (dB)", "BLER (%)", "Tx mean (dBm)", "at max (%)", "noise rise (dB)", "n")
	t.alignRight(0, 1, 2, 4, 5, 6, 7, 8, 9)
	for _, p := range res.GetEvaluated() {
		f := p.GetFigures()
		pass := "fail"
		if p.GetPass() {
			pass = "pass"
		}
		if p.GetCount() == res.GetCount() {
			pass += " *"
		}
		t.add(strconv.Itoa(int(p.GetCount())), strconv.Itoa(int(p.GetTotalUsers())), estCell(f.GetOutageProbability(), 100, 3),
			pass, estCell(f.GetSirErrorStdDb(), 1, 3), estCell(f.GetAchievedBler(), 100, 2), estCell(f.GetTxPowerMeanDbm(), 1, 2),
			estCell(f.GetMaxPowerFraction(), 100, 2), estCell(f.GetNoiseRiseMeanDb(), 1, 2), strconv.Itoa(int(f.GetOutageProbability().GetN())))
	}
	t.write(w)
	fmt.Fprintf(w, "\n%s\n", wrap(res.GetReason(), 78, ""))
	fmt.Fprintf(w, "Effort: %d replications, %s user-slots in %.2f s\n", res.GetReplications(), groupDigits(res.GetUserSlots()), res.GetWallTimeS())
}

func writeCapacityCSV(w io.Writer, res *pb.CapacityResult) error {
	cw := csv.NewWriter(w)
	cw.Write(append([]string{"count", "total_users", "pass", "n"}, searchFigureHeader()...))
	for _, p := range res.GetEvaluated() {
		r := []string{strconv.Itoa(int(p.GetCount())), strconv.Itoa(int(p.GetTotalUsers())), strconv.FormatBool(p.GetPass()),
			strconv.Itoa(int(p.GetFigures().GetOutageProbability().GetN()))}
		cw.Write(append(r, searchFigureCells(p.GetFigures())...))
	}
	cw.Flush()
	return cw.Error()
}
