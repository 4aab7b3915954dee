package report

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"google.golang.org/protobuf/encoding/protojson"

	clirender "github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// doc is what the page template renders.
type doc struct {
	Title     string
	Kind      string // "run", "sweep", "tune", "capacity"
	KindLabel string
	Created   string
	Source    string
	Verdict   verdict
	Sections  []section
	Scenario  scenarioView
	Repro     [][2]string
	Caution   string
}

// verdict is the answer, shown first: a headline, a status class for the
// colour of its box ("ok", "warn", "bad") and supporting lines.
type verdict struct {
	Headline string
	Class    string
	Lines    []string
}

type section struct {
	ID, Heading string
	Notes       []string
	Tables      []table
	Figures     []figure
}

// table is a caption, a header and rows of cells; Num marks the columns
// whose cells are right-aligned numbers; Mark marks highlighted rows.
type table struct {
	Caption string
	Head    []string
	Rows    [][]string
	Num     []bool
	Mark    []bool
}

func (t *table) add(mark bool, cells ...string) {
	t.Rows = append(t.Rows, cells)
	t.Mark = append(t.Mark, mark)
}

type scenarioView struct {
	Note string
	Rows [][2]string // field path, value
	JSON string
}

// detailFigures are the figure columns of the per-bin, per-user and sweep
// tables (labels, scales and decimals: client/render, the one home of
// figure labels).
var detailFigures = append(append([]string(nil), clirender.RunDetailFigures...), "noise_rise_mean_db")

// estimate is "v [lo, hi]" scaled; "–" when absent.
func estimate(e *pb.Estimate, scale float64, dec int) string {
	if e == nil {
		return "–"
	}
	return num(scale*e.GetValue(), dec) + " [" + num(scale*e.GetCiLow(), dec) + ",\u00a0" + num(scale*e.GetCiHigh(), dec) + "]"
}

// figureEstimate is the figure key of fs as "v [lo, hi]" in its display
// scale and decimals.
func figureEstimate(key string, fs *pb.Figures) string {
	f := clirender.MustFigure(key)
	return estimate(f.Get(fs), f.Scale, f.Dec)
}

// searchEstimate is the figure key of fs as "mean [low, high]" in its
// display scale and decimals.
func searchEstimate(key string, fs *pb.TuneFigures) string {
	f := clirender.MustFigure(key)
	return repEstimate(clirender.SearchFigure(fs, key), f.Scale, f.Dec)
}

// repEstimate is "mean [low, high]" scaled; the mean alone below 2 replications.
func repEstimate(e *pb.ReplicationEstimate, scale float64, dec int) string {
	if e == nil {
		return "–"
	}
	if e.GetN() < 2 {
		return num(scale*e.GetMean(), dec)
	}
	return num(scale*e.GetMean(), dec) + " [" + num(scale*e.GetLow(), dec) + ",\u00a0" + num(scale*e.GetHigh(), dec) + "]"
}

func numCols(n int, from ...int) []bool {
	v := make([]bool, n)
	for _, i := range from {
		if i < n {
			v[i] = true
		}
	}
	return v
}

func rangeFrom(a, b int) []int {
	var v []int
	for i := a; i < b; i++ {
		v = append(v, i)
	}
	return v
}

func thousands(n int64) string {
	s := strconv.FormatInt(n, 10)
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	var b strings.Builder
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteString("\u202f")
		}
		b.WriteRune(c)
	}
	if neg {
		return "-" + b.String()
	}
	return b.String()
}

func build(in Input) (*doc, error) {
	kind, err := in.kind()
	if err != nil {
		return nil, err
	}
	d := &doc{Kind: kind, Caution: Caution, Source: in.Source}
	if !in.Created.IsZero() {
		d.Created = in.Created.UTC().Format("2006-01-02 15:04 UTC")
	}
	var sc *pb.Scenario
	switch kind {
	case "run":
		d.KindLabel = "Simulation run"
		sc = in.Run.GetNormalisedScenario()
		d.Scenario.Note = "The normalised scenario the engine ran (defaults filled in)."
		err = buildRun(d, in.Run)
	case "sweep":
		d.KindLabel = "Sweep"
		sc = in.Sweep.Base
		d.Scenario.Note = "The base scenario of the sweep."
		if sc == nil {
			pts := sortedPoints(in.Sweep.Points)
			if len(pts) > 0 && pts[0].GetReport().GetNormalisedScenario() != nil {
				sc = pts[0].GetReport().GetNormalisedScenario()
				d.Scenario.Note = fmt.Sprintf("The normalised scenario of grid point %d (%s); the other points differ only on the swept axes.",
					pts[0].GetIndex(), coordText(in.Sweep.Axes, pts[0].GetCoordinates()))
			}
		}
		err = buildSweep(d, in.Sweep, in.EngineVersion)
	case "tune":
		d.KindLabel = "Tuning recommendation"
		sc = in.TuneRequest.GetBase()
		d.Scenario.Note = "The base scenario every candidate starts from."
		err = buildTune(d, in.Tune, in.TuneRequest, in.EngineVersion)
	case "capacity":
		d.KindLabel = "Capacity search"
		sc = in.CapacityRequest.GetBase()
		d.Scenario.Note = "The base scenario of the capacity search."
		err = buildCapacity(d, in.Capacity, in.CapacityRequest, in.EngineVersion)
	}
	if err != nil {
		return nil, err
	}
	if sc == nil && in.Scenario != nil {
		sc = in.Scenario
		d.Scenario.Note = "The scenario supplied with the result."
	}
	if sc == nil {
		d.Scenario.Note = "This result does not carry its scenario (sweep, tune and capacity results written with --format json do not); keep the scenario file beside it, or give it when writing the report."
	} else {
		if err := fillScenario(&d.Scenario, sc); err != nil {
			return nil, err
		}
	}
	d.Title = in.Title
	if d.Title == "" {
		d.Title = sc.GetName()
	}
	if d.Title == "" {
		d.Title = "fadeloop " + kind + " result"
	}
	return d, nil
}

// fillScenario writes the scenario as field-path rows and as indented JSON
// (proto field names, as scenario files use).
func fillScenario(v *scenarioView, sc *pb.Scenario) error {
	raw, err := protojson.MarshalOptions{UseProtoNames: true}.Marshal(sc)
	if err != nil {
		return fmt.Errorf("scenario JSON: %w", err)
	}
	var b bytes.Buffer
	if err := json.Indent(&b, raw, "", "  "); err != nil {
		return err
	}
	v.JSON = b.String()
	dec := json.NewDecoder(bytes.NewReader(raw))
	dec.UseNumber()
	if err := flatten(dec, "", &v.Rows); err != nil {
		return fmt.Errorf("scenario JSON: %w", err)
	}
	return nil
}

// flatten reads one JSON value from dec and appends a (field path, value)
// row per scalar, in the order protojson wrote them (field-number order).
func flatten(dec *json.Decoder, prefix string, rows *[][2]string) error {
	tok, err := dec.Token()
	if err != nil {
		return err
	}
	switch t := tok.(type) {
	case json.Delim:
		switch t {
		case '{':
			for dec.More() {
				k, err := dec.Token()
				if err != nil {
					return err
				}
				p := fmt.Sprint(k)
				if prefix != "" {
					p = prefix + "." + p
				}
				if err := flatten(dec, p, rows); err != nil {
					return err
				}
			}
		case '[':
			i := 0
			for ; dec.More(); i++ {
				if err := flatten(dec, fmt.Sprintf("%s[%d]", prefix, i), rows); err != nil {
					return err
				}
			}
			if i == 0 {
				*rows = append(*rows, [2]string{prefix, "(none)"})
			}
		}
		_, err := dec.Token() // the closing delimiter
		return err
	case nil:
		*rows = append(*rows, [2]string{prefix, "null"})
	default:
		*rows = append(*rows, [2]string{prefix, fmt.Sprint(t)})
	}
	return nil
}

func buildRun(d *doc, rep *pb.RunReport) error {
	agg := rep.GetAggregate()
	f := rep.GetFeasibility()
	sc := rep.GetNormalisedScenario()
	bler := sc.GetOuterLoop().GetBlerTarget()
	if f.GetInfeasible() {
		d.Verdict = verdict{Class: "bad", Headline: "Infeasible load: the users cannot all reach their SIR target."}
		d.Verdict.Lines = append(d.Verdict.Lines, f.GetReason())
		if lf := f.GetLoadFactor(); lf > 0 {
			l := "load factor " + num(lf, 3)
			if sr := f.GetSpectralRadius(); sr > 0 {
				l += ", spectral radius " + num(sr, 3)
			}
			d.Verdict.Lines = append(d.Verdict.Lines, l+" (infeasible at 1 or more)")
		}
	} else {
		out := agg.GetOutageProbability()
		d.Verdict = verdict{Class: "ok", Headline: fmt.Sprintf("Outage %s %% [%s, %s], SIR error std %s dB [%s, %s]",
			num(100*out.GetValue(), 2), num(100*out.GetCiLow(), 2), num(100*out.GetCiHigh(), 2),
			num(agg.GetSirErrorStdDb().GetValue(), 2), num(agg.GetSirErrorStdDb().GetCiLow(), 2), num(agg.GetSirErrorStdDb().GetCiHigh(), 2))}
		bl := agg.GetAchievedBler()
		line := fmt.Sprintf("Achieved BLER %s %% [%s, %s]", num(100*bl.GetValue(), 2), num(100*bl.GetCiLow(), 2), num(100*bl.GetCiHigh(), 2))
		if bler > 0 {
			line += fmt.Sprintf(" against a target of %s %%", num(100*bler, 2))
		}
		ol := sc.GetOuterLoop()
		be := agg.GetBlerTargetError()
		switch {
		case ol != nil && !ol.GetEnabled() && bler > 0:
			line += " (outer loop off: the SIR target is fixed, the BLER target is for reference)"
		case ol.GetEnabled() && be != nil && (be.GetCiLow() > 0 || be.GetCiHigh() < 0):
			d.Verdict.Class = "warn"
			line += fmt.Sprintf("; the outer loop did not hold it: achieved − target %s %% [%s, %s] excludes 0",
				num(100*be.GetValue(), 2), num(100*be.GetCiLow(), 2), num(100*be.GetCiHigh(), 2))
		}
		d.Verdict.Lines = append(d.Verdict.Lines, line+".",
			fmt.Sprintf("Mean Tx power %s dBm, time at maximum power %s %%, mean noise rise %s dB.",
				estimate(agg.GetTxPowerMeanDbm(), 1, 2), estimate(agg.GetMaxPowerFraction(), 100, 2), estimate(agg.GetNoiseRiseMeanDb(), 1, 2)))
	}
	if f.GetInfeasible() && rep.GetSimulatedUserSlots() == 0 {
		// Infeasible before the run: nothing simulated, so no figures,
		// tables or plots (they would be all zeros).
		d.Verdict.Lines = append(d.Verdict.Lines, fmt.Sprintf("%d users: not simulated, no figures.", agg.GetUsers()))
		d.Repro = [][2]string{
			{"seed", strconv.FormatUint(rep.GetSeed(), 10)},
			{"engine version", orMissing(rep.GetEngineVersion())},
			{"user-slots simulated", "0"},
		}
		return nil
	}
	d.Verdict.Lines = append(d.Verdict.Lines, fmt.Sprintf("%d users, %s slots × %d replication(s) after %s warm-up slots.",
		agg.GetUsers(), thousands(rep.GetSlots()), rep.GetReplications(), thousands(sc.GetRun().GetWarmupSlots())))
	d.Verdict.Lines = append(d.Verdict.Lines, rep.GetNotes()...)

	t := table{Caption: "Aggregate figures over all users, with 95 % confidence intervals.", Head: []string{"figure", "value", "95 % CI low", "95 % CI high"}, Num: numCols(4, 1, 2, 3)}
	for _, fd := range clirender.Figures() {
		e := fd.Get(agg)
		if e == nil {
			continue
		}
		t.add(false, fd.Label, num(fd.Scale*e.GetValue(), fd.Dec), num(fd.Scale*e.GetCiLow(), fd.Dec), num(fd.Scale*e.GetCiHigh(), fd.Dec))
	}
	s := section{ID: "figures", Heading: "Figures", Tables: []table{t}}
	if bins := rep.GetDistanceBins(); len(bins) > 0 {
		bt := table{Caption: "Per distance bin (value [95 % CI]).", Head: []string{"distance (m)", "users"}}
		for _, k := range detailFigures {
			bt.Head = append(bt.Head, clirender.MustFigure(k).Head())
		}
		bt.Num = numCols(len(bt.Head), rangeFrom(1, len(bt.Head))...)
		for _, b := range bins {
			row := []string{num(b.GetMinDistanceM(), 0) + "–" + num(b.GetMaxDistanceM(), 0), strconv.Itoa(int(b.GetFigures().GetUsers()))}
			for _, k := range detailFigures {
				row = append(row, figureEstimate(k, b.GetFigures()))
			}
			bt.add(false, row...)
		}
		s.Tables = append(s.Tables, bt)
	}
	d.Sections = append(d.Sections, s)
	figs, err := runFigures(rep)
	if err != nil {
		return err
	}
	if len(figs) > 0 {
		d.Sections = append(d.Sections, section{ID: "plots", Heading: "Plots", Figures: figs})
	}
	if us := rep.GetUsers(); len(us) > 0 {
		ut := table{Caption: "Per user (value [95 % CI]).", Head: []string{"user", "group", "distance (m)", "speed (km/h)", "path loss (dB)"}}
		for _, k := range detailFigures {
			ut.Head = append(ut.Head, clirender.MustFigure(k).Head())
		}
		ut.Num = numCols(len(ut.Head), append([]int{0}, rangeFrom(2, len(ut.Head))...)...)
		for _, u := range us {
			row := []string{strconv.Itoa(int(u.GetUser())), groupName(sc, u.GetGroup()), num(u.GetDistanceM(), 0), num(u.GetSpeedKmh(), 0), num(u.GetPathLossDb(), 1)}
			for _, k := range detailFigures {
				row = append(row, figureEstimate(k, u.GetFigures()))
			}
			ut.add(false, row...)
		}
		d.Sections = append(d.Sections, section{ID: "users", Heading: "Per user", Tables: []table{ut}})
	}
	d.Repro = [][2]string{
		{"seed", strconv.FormatUint(rep.GetSeed(), 10)},
		{"engine version", orMissing(rep.GetEngineVersion())},
		{"replications", strconv.Itoa(int(rep.GetReplications()))},
		{"slots per replication", thousands(rep.GetSlots())},
		{"user-slots simulated", thousands(rep.GetSimulatedUserSlots())},
		{"wall time", num(rep.GetWallTimeS(), 2) + " s (" + num(rep.GetUserSlotsPerS()/1e6, 2) + " M user-slots/s)"},
	}
	return nil
}

func orMissing(s string) string {
	if s == "" {
		return "not recorded in this result"
	}
	return s
}

func sortedPoints(pts []*pb.SweepPoint) []*pb.SweepPoint {
	out := append([]*pb.SweepPoint(nil), pts...)
	sort.SliceStable(out, func(i, j int) bool { return out[i].GetIndex() < out[j].GetIndex() })
	return out
}

func coordText(axes []*pb.SweepAxis, c []float64) string {
	var parts []string
	for i, a := range axes {
		if i < len(c) {
			parts = append(parts, a.GetPath()+" = "+strconv.FormatFloat(c[i], 'g', 6, 64))
		}
	}
	if len(parts) == 0 {
		return "base setting"
	}
	return strings.Join(parts, ", ")
}

func buildSweep(d *doc, s *Sweep, engine string) error {
	pts := sortedPoints(s.Points)
	if len(pts) == 0 {
		return fmt.Errorf("report input: the sweep has no points")
	}
	// Verdict: the lowest outage among feasible points, and whether its
	// interval separates it from the next best.
	var best, second *pb.SweepPoint
	infeasible := 0
	for _, p := range pts {
		if p.GetReport().GetFeasibility().GetInfeasible() {
			infeasible++
			continue
		}
		o := p.GetReport().GetAggregate().GetOutageProbability().GetValue()
		switch {
		case best == nil || o < best.GetReport().GetAggregate().GetOutageProbability().GetValue():
			best, second = p, best
		case second == nil || o < second.GetReport().GetAggregate().GetOutageProbability().GetValue():
			second = p
		}
	}
	if best == nil {
		d.Verdict = verdict{Class: "bad", Headline: "No grid point carries its load: every point is infeasible."}
	} else {
		bo := best.GetReport().GetAggregate().GetOutageProbability()
		d.Verdict = verdict{Class: "ok", Headline: fmt.Sprintf("Lowest outage at %s: %s %% [%s, %s]",
			coordText(s.Axes, best.GetCoordinates()), num(100*bo.GetValue(), 2), num(100*bo.GetCiLow(), 2), num(100*bo.GetCiHigh(), 2))}
		if second != nil {
			so := second.GetReport().GetAggregate().GetOutageProbability()
			if so.GetCiLow() <= bo.GetCiHigh() {
				d.Verdict.Class = "warn"
				d.Verdict.Lines = append(d.Verdict.Lines, fmt.Sprintf("Not separated from the next best, %s (%s %% [%s, %s]): the intervals overlap. For a decision with paired evidence, use tune.",
					coordText(s.Axes, second.GetCoordinates()), num(100*so.GetValue(), 2), num(100*so.GetCiLow(), 2), num(100*so.GetCiHigh(), 2)))
			} else {
				d.Verdict.Lines = append(d.Verdict.Lines, fmt.Sprintf("The next best, %s, has %s %% [%s, %s]; the intervals do not overlap.",
					coordText(s.Axes, second.GetCoordinates()), num(100*so.GetValue(), 2), num(100*so.GetCiLow(), 2), num(100*so.GetCiHigh(), 2)))
			}
		}
	}
	if infeasible > 0 {
		d.Verdict.Lines = append(d.Verdict.Lines, fmt.Sprintf("%d of %d points are infeasible (load not carried).", infeasible, len(pts)))
	}
	t := table{Caption: "Every grid point (value [95 % CI]); the lowest-outage point is marked.", Head: []string{"point"}}
	for _, a := range s.Axes {
		// A break opportunity after each dot: long field paths wrap there.
		t.Head = append(t.Head, strings.ReplaceAll(a.GetPath(), ".", ".\u200b"))
	}
	for _, k := range detailFigures {
		t.Head = append(t.Head, clirender.MustFigure(k).Head())
	}
	t.Head = append(t.Head, "load")
	t.Num = numCols(len(t.Head), rangeFrom(0, len(t.Head)-1)...)
	for _, p := range pts {
		row := []string{strconv.FormatInt(p.GetIndex(), 10)}
		for i := range s.Axes {
			v := math.NaN()
			if i < len(p.GetCoordinates()) {
				v = p.GetCoordinates()[i]
			}
			row = append(row, strconv.FormatFloat(v, 'g', 6, 64))
		}
		for _, k := range detailFigures {
			row = append(row, figureEstimate(k, p.GetReport().GetAggregate()))
		}
		load := "ok"
		if p.GetReport().GetFeasibility().GetInfeasible() {
			load = "infeasible"
		}
		t.add(p == best, append(row, load)...)
	}
	d.Sections = append(d.Sections, section{ID: "points", Heading: "Grid points", Tables: []table{t}})
	title := pts[0].GetReport().GetNormalisedScenario().GetName()
	if s.Base != nil && s.Base.GetName() != "" {
		title = s.Base.GetName()
	}
	figs, err := sweepFigures(title, s.Axes, pts)
	if err != nil {
		return err
	}
	if len(figs) > 0 {
		d.Sections = append(d.Sections, section{ID: "plots", Heading: "Plots", Figures: figs})
	}
	seeds := map[uint64]bool{}
	var userSlots int64
	for _, p := range pts {
		seeds[p.GetSeed()] = true
		userSlots += p.GetReport().GetSimulatedUserSlots()
	}
	seedText := strconv.FormatUint(pts[0].GetSeed(), 10) + " (every point: common seeds)"
	if len(seeds) > 1 {
		seedText = fmt.Sprintf("per point (%d distinct; see the seed column of --format csv); point %d: %d", len(seeds), pts[0].GetIndex(), pts[0].GetSeed())
	}
	if engine == "" {
		engine = pts[0].GetReport().GetEngineVersion()
	}
	d.Repro = [][2]string{
		{"seed", seedText},
		{"engine version", orMissing(engine)},
		{"axes", axesText(s.Axes)},
		{"points in this result", strconv.Itoa(len(pts))},
		{"user-slots simulated", thousands(userSlots)},
	}
	if sum := s.Summary; sum != nil {
		d.Repro = append(d.Repro, [2]string{"grid points", thousands(sum.GetGridPoints())},
			[2]string{"wall time", num(sum.GetWallTimeS(), 2) + " s (" + num(sum.GetUserSlotsPerS()/1e6, 2) + " M user-slots/s)"})
	}
	return nil
}

func axesText(axes []*pb.SweepAxis) string {
	var parts []string
	for _, a := range axes {
		var vs []string
		for _, v := range a.GetValues() {
			vs = append(vs, strconv.FormatFloat(v, 'g', 6, 64))
		}
		if len(vs) == 0 {
			vs = []string{fmt.Sprintf("%g:%g:%d", a.GetFirst(), a.GetLast(), a.GetCount())}
		}
		parts = append(parts, a.GetPath()+"="+strings.Join(vs, ","))
	}
	if len(parts) == 0 {
		return "none"
	}
	return strings.Join(parts, "; ")
}

// pointLabel is "step_db=0.5, update_rate_hz=1500" for a candidate.
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

var statusNames = map[pb.CandidateStatus]string{
	pb.CandidateStatus_CANDIDATE_STATUS_CONTENDING: "contending",
	pb.CandidateStatus_CANDIDATE_STATUS_DROPPED:    "dropped",
	pb.CandidateStatus_CANDIDATE_STATUS_EQUIVALENT: "equivalent",
}

func decisionText(dc *pb.Decision) (string, string) {
	switch {
	case dc.GetConstraintsUnmet():
		return "no candidate met the constraints; ranked by outage", "bad"
	case dc.GetDeclared():
		return "declared winner", "ok"
	case len(dc.GetTieSet()) > 1:
		return fmt.Sprintf("tie of %d, picked by the tie rule", len(dc.GetTieSet())), "warn"
	}
	return "not separated from the runner-up at this budget", "warn"
}

// verdictClass is the colour class of a decision's verdict.
func verdictClass(dc *pb.Decision) string {
	switch dc.GetVerdict() {
	case pb.Verdict_VERDICT_CONSTRAINTS_UNMET:
		return "bad"
	case pb.Verdict_VERDICT_TIE:
		return "warn"
	}
	if len(dc.GetWarnings()) > 0 {
		return "warn"
	}
	return "ok"
}

func buildTune(d *doc, rec *pb.Recommendation, req *pb.TuneRequest, engine string) error {
	k := rec.GetObjective().GetKind()
	scale, dec, unit, oname := objectiveUnit(rec)
	conf := rec.GetConfidence()
	cands := rec.GetCandidates()
	ov := rec.GetOverall()
	state, class := decisionText(ov)
	d.Verdict = verdict{Class: class, Headline: "Use " + pointLabel(ov.GetSetting()) + " (" + state + ")"}
	if ov.GetVerdict() != pb.Verdict_VERDICT_UNSPECIFIED {
		// The API's own verdict and lines (helper V's Decision fields),
		// in the CLI's order: headline, misses, runner-up, warnings, tie
		// rule; nothing composed here.
		lines := clirender.DecisionLines(ov, rec.GetTieRule())
		d.Verdict = verdict{Class: verdictClass(ov), Headline: "Verdict: " + clirender.VerdictName(ov)}
		d.Verdict.Lines = append(d.Verdict.Lines, lines...)
	}
	if len(rec.GetConditions()) > 1 {
		var ws []string
		for _, c := range rec.GetConditions() {
			ws = append(ws, fmt.Sprintf("%s (weight %g)", c.GetName(), c.GetWeight()))
		}
		d.Verdict.Lines = append(d.Verdict.Lines, "Weighted over "+strings.Join(ws, ", ")+".")
	}
	if ov.GetVerdict() == pb.Verdict_VERDICT_UNSPECIFIED {
		if ru := ov.GetRunnerUp(); ru >= 0 && int(ru) < len(cands) {
			ev := ov.GetEvidence()
			d.Verdict.Lines = append(d.Verdict.Lines, fmt.Sprintf("Runner-up %s: %s %s worse on %s, %g %% interval [%s, %s], %d paired replications.",
				pointLabel(cands[ru]), num(scale*ev.GetMean(), dec), unit, oname, 100*conf,
				num(scale*ev.GetLow(), dec), num(scale*ev.GetHigh(), dec), ev.GetN()))
		} else {
			d.Verdict.Lines = append(d.Verdict.Lines, "No runner-up (one candidate).")
		}
		if ts := ov.GetTieSet(); len(ts) > 1 {
			var names []string
			for _, i := range ts {
				if int(i) < len(cands) {
					names = append(names, pointLabel(cands[i]))
				}
			}
			d.Verdict.Lines = append(d.Verdict.Lines, "Tie set: "+strings.Join(names, "; ")+". Tie rule: "+rec.GetTieRule())
		}
		if r := ov.GetReason(); r != "" {
			d.Verdict.Lines = append(d.Verdict.Lines, "Why: "+r)
		}
	}

	ct := table{Caption: fmt.Sprintf("Per condition: the best setting, its %s, the paired difference to the runner-up and the fixed-power baseline (%g %% intervals).", oname, 100*conf),
		Head: []string{"condition", "weight", "recommended", "verdict", oname + " (" + unit + ")", "runner-up diff (" + unit + ")", "fixed power", "gain over fixed", "f_D·T"}}
	ct.Num = numCols(len(ct.Head), 1, 4, 5, 6, 7, 8)
	for _, c := range rec.GetConditions() {
		dc := c.GetDecision()
		v, _ := decisionText(dc)
		if dc.GetVerdict() != pb.Verdict_VERDICT_UNSPECIFIED {
			v = clirender.VerdictName(dc)
		}
		var best *pb.CandidateResult
		for _, cr := range c.GetCandidates() {
			if cr.GetCandidate() == dc.GetBest() {
				best = cr
			}
		}
		diff := "–"
		if dc.GetRunnerUp() >= 0 {
			diff = repEstimate(dc.GetEvidence(), scale, dec)
		}
		base, gain := "–", "–"
		if b := c.GetBaseline(); b != nil {
			gs, gd := 100.0, 3
			bf := b.GetFigures().GetOutageProbability()
			if k == pb.ObjectiveKind_OBJECTIVE_KIND_MIN_SIR_ERROR_STD {
				gs, gd, bf = 1, 3, b.GetFigures().GetSirErrorStdDb()
			}
			base = repEstimate(bf, gs, gd)
			gain = num(gs*b.GetGain().GetMean(), gd)
			if bl := b.GetFigure(); bl != nil {
				// The baseline in the judged figure's own units (API label).
				sc := bl.GetDisplayScale()
				if sc == 0 {
					sc = 1
				}
				base = repEstimate(b.GetFixed(), sc, int(bl.GetDecimals())) + " " + bl.GetUnit()
				gain = repEstimate(b.GetGain(), sc, int(bl.GetDecimals())) + " " + bl.GetDiffUnit()
				if b.GetFixedMisses() {
					gain += " (fixed power misses the constraints)"
				}
			}
			if b.GetBarelyHelps() {
				gain += " (barely helps)"
			}
		}
		ct.add(false, c.GetName(), strconv.FormatFloat(c.GetWeight(), 'g', 4, 64), pointLabel(dc.GetSetting()), v,
			repEstimate(best.GetObjective(), scale, dec), diff, base, gain, num(c.GetDopplerProductMax(), 4))
	}
	s := section{ID: "conditions", Heading: "Conditions", Tables: []table{ct}}
	for _, c := range rec.GetConditions() {
		if r := c.GetDecision().GetReason(); r != "" {
			s.Notes = append(s.Notes, c.GetName()+": "+r)
		}
	}
	d.Sections = append(d.Sections, s)

	cs := section{ID: "candidates", Heading: "Candidates"}
	if oc := rec.GetOverallCandidates(); len(oc) > 0 && len(rec.GetConditions()) > 1 {
		cs.Tables = append(cs.Tables, candidateTable("Weighted over all conditions; the recommended setting is marked.", clirender.OrderedCandidates(ov, oc), rec, ov.GetBest(), true))
	}
	for _, c := range rec.GetConditions() {
		cs.Tables = append(cs.Tables, candidateTable("Condition "+c.GetName()+"; its recommended setting is marked and listed first.", clirender.OrderedCandidates(c.GetDecision(), c.GetCandidates()), rec, c.GetDecision().GetBest(), false))
	}
	d.Sections = append(d.Sections, cs)

	figs, err := tuneFigures(req.GetBase().GetName(), rec)
	if err != nil {
		return err
	}
	if len(figs) > 0 {
		d.Sections = append(d.Sections, section{ID: "plots", Heading: "Plots", Figures: figs})
	}
	e := rec.GetEffort()
	eq := ""
	if n := e.GetEqualAllocationReplications(); n > 0 {
		eq = fmt.Sprintf("; equal allocation to the same precision: %s runs (this used %s %% of it)",
			thousands(n), num(100*float64(e.GetReplications())/float64(n), 0))
	}
	effort := fmt.Sprintf("%s candidate runs + %s fixed-power runs in %d rounds (at most %d replications of one candidate)%s; %s user-slots in %s s",
		thousands(e.GetReplications()), thousands(e.GetBaselineReplications()), e.GetStages(), e.GetMaxReplicationsUsed(), eq,
		thousands(e.GetUserSlots()), num(e.GetWallTimeS(), 2))
	if e.GetBudgetExhausted() {
		effort += "; the budget ran out before every comparison was settled"
	}
	d.Repro = [][2]string{
		{"seed", strconv.FormatUint(rec.GetSeed(), 10) + " (common random numbers: every candidate under one condition sees the same seeds)"},
		{"engine version", orMissing(engine)},
		{"objective", "minimise " + oname},
		{"confidence", num(100*conf, 2) + " %"},
		{"candidates × conditions", fmt.Sprintf("%d × %d", len(cands), len(rec.GetConditions()))},
		{"effort", effort},
	}
	if req != nil {
		d.Repro = append(d.Repro, [2]string{"axes", axesText(req.GetAxes())})
	}
	return nil
}

// candidateTable lists candidates with their objective, the difference to
// the best and their figures (the figure that is the objective is not
// repeated). overall: the weighted table, which has no per-figure values.
func candidateTable(caption string, crs []*pb.CandidateResult, rec *pb.Recommendation, best int32, overall bool) table {
	cands := rec.GetCandidates()
	scale, dec, unit, oname := objectiveUnit(rec)
	okey := clirender.ObjectiveKey(rec.GetObjective().GetKind())
	var cols []*pb.FigureLabel
	for _, key := range clirender.CandidateFigures {
		if key != okey {
			cols = append(cols, clirender.SearchLabel(rec.GetFigures(), key))
		}
	}
	if overall {
		cols = nil
	}
	t := table{Caption: caption, Head: []string{"#", "setting", oname + " (" + unit + ")", "diff to best (" + unit + ")"}}
	for _, c := range cols {
		t.Head = append(t.Head, clirender.LabelHead(c))
	}
	t.Head = append(t.Head, "n", "status")
	t.Num = numCols(len(t.Head), append([]int{0}, rangeFrom(2, len(t.Head)-1)...)...)
	for _, cr := range crs {
		f := cr.GetFigures()
		status := statusNames[cr.GetStatus()]
		if !cr.GetFeasible() {
			status += ", infeasible"
		}
		label := "candidate " + strconv.Itoa(int(cr.GetCandidate()))
		if i := cr.GetCandidate(); i >= 0 && int(i) < len(cands) {
			label = pointLabel(cands[i])
		}
		row := []string{strconv.Itoa(int(cr.GetCandidate())), label,
			repEstimate(cr.GetObjective(), scale, dec), num(scale*cr.GetDiffToBest().GetMean(), dec)}
		for _, c := range cols {
			row = append(row, repEstimate(clirender.SearchFigure(f, c.GetKey()), c.GetDisplayScale(), int(c.GetDecimals())))
		}
		row = append(row, strconv.Itoa(int(cr.GetObjective().GetN())), status)
		t.add(cr.GetCandidate() == best, row...)
	}
	return t
}

func buildCapacity(d *doc, res *pb.CapacityResult, req *pb.CapacityRequest, engine string) error {
	group := "the group"
	limit := ""
	if req != nil {
		group = fmt.Sprintf("group %d", req.GetGroup())
		if gs := req.GetBase().GetGroups(); int(req.GetGroup()) < len(gs) && gs[req.GetGroup()].GetName() != "" {
			group += fmt.Sprintf(" (%q)", gs[req.GetGroup()].GetName())
		}
		limit = " at outage ≤ " + num(100*req.GetOutageLimit(), 2) + " %"
	}
	switch {
	case res.GetBelowRange():
		d.Verdict = verdict{Class: "bad", Headline: "Even the smallest count searched fails" + limit + "."}
	case res.GetAtRangeTop():
		d.Verdict = verdict{Class: "warn", Headline: fmt.Sprintf("Capacity of %s%s: at least %d (the top of the searched range), %d users in all", group, limit, res.GetCount(), res.GetTotalUsers())}
	default:
		d.Verdict = verdict{Class: "ok", Headline: fmt.Sprintf("Capacity of %s%s: %d in the group, %d users in all", group, limit, res.GetCount(), res.GetTotalUsers())}
	}
	if r := res.GetReason(); r != "" {
		d.Verdict.Lines = append(d.Verdict.Lines, r)
	}
	reasonHasPoles := strings.Contains(res.GetReason(), "Gilhousen")
	if pp := res.GetPoleParams(); res.GetPole() > 0 {
		line := fmt.Sprintf("Pole capacity (Gilhousen et al. 1991): %s users (W/R = %s, Eb/I0 = %s dB, activity %g, f = %g, %g sector(s)).",
			num(res.GetPole(), 1), num(pp.GetChipRateHz()/pp.GetBitRateBps(), 1), num(pp.GetEbI0Db(), 2), pp.GetActivityFactor(), pp.GetOtherCellRatio(), pp.GetSectors())
		if reasonHasPoles {
			line = "Pole capacity parameters: W/R = " + num(pp.GetChipRateHz()/pp.GetBitRateBps(), 1) + ", Eb/I0 = " + num(pp.GetEbI0Db(), 2) +
				fmt.Sprintf(" dB, activity %g, f = %g, %g sector(s).", pp.GetActivityFactor(), pp.GetOtherCellRatio(), pp.GetSectors())
		}
		d.Verdict.Lines = append(d.Verdict.Lines, line)
	} else if e := res.GetPoleError(); e != "" {
		d.Verdict.Lines = append(d.Verdict.Lines, "Pole capacity not computed: "+e)
	}
	if mp := res.GetModelPole(); mp > 0 && !reasonHasPoles {
		d.Verdict.Lines = append(d.Verdict.Lines, "Pole of the engine's interference equation: "+num(mp, 1)+" users.")
	}
	if res.GetNonMonotone() {
		d.Verdict.Class = "warn"
		d.Verdict.Lines = append(d.Verdict.Lines, "Outage was not monotone in the count over the evaluated points; check the table.")
	}
	if res.GetBudgetExhausted() {
		d.Verdict.Class = "warn"
		d.Verdict.Lines = append(d.Verdict.Lines, "The user-slot budget ran out before the search finished.")
	}
	t := table{Caption: "Every count evaluated (mean [interval] over replications); the capacity is marked.",
		Head: []string{"count", "users", clirender.MustFigure("outage_probability").Head(), "pass"}}
	capCols := append(append([]string(nil), clirender.CapacityFigures...), "noise_rise_mean_db")
	for _, k := range capCols {
		t.Head = append(t.Head, clirender.MustFigure(k).Head())
	}
	t.Num = numCols(len(t.Head), append([]int{0, 1, 2}, rangeFrom(4, len(t.Head))...)...)
	ev := append([]*pb.CapacityPoint(nil), res.GetEvaluated()...)
	sort.SliceStable(ev, func(i, j int) bool { return ev[i].GetCount() < ev[j].GetCount() })
	for _, p := range ev {
		f := p.GetFigures()
		pass := "fail"
		if p.GetPass() {
			pass = "pass"
		}
		row := []string{strconv.Itoa(int(p.GetCount())), strconv.Itoa(int(p.GetTotalUsers())), searchEstimate("outage_probability", f), pass}
		for _, k := range capCols {
			row = append(row, searchEstimate(k, f))
		}
		t.add(p.GetCount() == res.GetCount() && !res.GetBelowRange(), row...)
	}
	d.Sections = append(d.Sections, section{ID: "evaluated", Heading: "Counts evaluated", Tables: []table{t}})
	seed := "not recorded in this result"
	if req != nil {
		seed = strconv.FormatUint(req.GetBase().GetRun().GetSeed(), 10) + " (the base scenario's run.seed; common random numbers across counts)"
	}
	d.Repro = [][2]string{
		{"seed", seed},
		{"engine version", orMissing(engine)},
		{"effort", fmt.Sprintf("%s replications, %s user-slots in %s s", thousands(res.GetReplications()), thousands(res.GetUserSlots()), num(res.GetWallTimeS(), 2))},
	}
	return nil
}
