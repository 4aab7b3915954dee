package render

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

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

// ObjectiveUnit returns the table scale, decimals and unit of an objective.
func ObjectiveUnit(k pb.ObjectiveKind) (scale float64, dec int, unit, name string) {
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
		return Num(v, dec)
	}
	return Num(v, dec) + " ±" + Num(math.Max(v-lo, hi-v), dec)
}

// interval is "[lo, hi]", scaled.
func interval(e *pb.ReplicationEstimate, scale float64, dec int) string {
	return "[" + Num(scale*e.GetLow(), dec) + ", " + Num(scale*e.GetHigh(), dec) + "]"
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
	scale, dec, unit, _ := ObjectiveUnit(k)
	if d.GetConstraintsUnmet() {
		scale, dec, unit = 100, 3, "%"
	}
	ev := d.GetEvidence()
	than := ""
	if l := d.GetLeader(); l != d.GetBest() && l >= 0 && int(l) < len(cands) {
		than = " than the leader " + pointLabel(cands[l]) + " (best point estimate)"
	}
	line := fmt.Sprintf("%s: %s %s worse%s, %g %% interval %s, %d paired replications", pointLabel(cands[ru]),
		Num(scale*ev.GetMean(), dec), unit, than, 100*conf, interval(ev, scale, dec), ev.GetN())
	return line
}

// TuneTable writes a tuning recommendation for people: the chosen setting,
// the evidence against the runner-up and every candidate.
func TuneTable(w io.Writer, req *pb.TuneRequest, rec *pb.Recommendation) {
	k := rec.GetObjective().GetKind()
	scale, dec, unit, oname := ObjectiveUnit(k)
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
	fmt.Fprintf(w, "Why:            %s\n", Wrap(ov.GetReason(), 62, strings.Repeat(" ", 16)))
	fmt.Fprintf(w, "Tie rule:       %s\n\n", Wrap(rec.GetTieRule(), 62, strings.Repeat(" ", 16)))

	t := NewTable("condition", "weight", "best setting", "verdict", oname+" ("+unit+")", "runner-up diff ("+unit+")",
		"fixed power", "gain over fixed", "f_D·T")
	t.AlignRight(1, 4, 5, 6, 7, 8)
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
			diff = Num(scale*d.GetEvidence().GetMean(), dec) + " " + interval(d.GetEvidence(), scale, dec)
		}
		base, gain := "–", "–"
		if b := c.GetBaseline(); b != nil {
			gs, gd := 100.0, 3
			bf := b.GetFigures().GetOutageProbability()
			if k == pb.ObjectiveKind_OBJECTIVE_KIND_MIN_SIR_ERROR_STD {
				gs, gd, bf = 1, 3, b.GetFigures().GetSirErrorStdDb()
			}
			base = estCell(bf, gs, gd)
			gain = Num(gs*b.GetGain().GetMean(), gd)
			if b.GetBarelyHelps() {
				gain += " (barely helps)"
			}
		}
		t.Add(c.GetName(), strconv.FormatFloat(c.GetWeight(), 'g', 4, 64), pointLabel(d.GetSetting()), verdict,
			estCell(best.GetObjective(), scale, dec), diff, base, gain, Num(c.GetDopplerProductMax(), 4))
	}
	t.Write(w)
	fmt.Fprintln(w)
	for _, c := range rec.GetConditions() {
		fmt.Fprintf(w, "Condition %s: %s\n", c.GetName(), Wrap(c.GetDecision().GetReason(), 66, "  "))
		ct := NewTable("  #", "setting", oname+" ("+unit+")", "diff to best", "SIR err std (dB)", "outage (%)",
			"BLER (%)", "Tx mean (dBm)", "noise rise (dB)", "n", "status")
		ct.AlignRight(0, 2, 3, 4, 5, 6, 7, 8, 9)
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
			ct.Add(mark+strconv.Itoa(int(cr.GetCandidate())), pointLabel(cands[cr.GetCandidate()]),
				estCell(cr.GetObjective(), scale, dec), Num(scale*cr.GetDiffToBest().GetMean(), dec),
				estCell(f.GetSirErrorStdDb(), 1, 3), estCell(f.GetOutageProbability(), 100, 3),
				estCell(f.GetAchievedBler(), 100, 2), estCell(f.GetTxPowerMeanDbm(), 1, 2),
				estCell(f.GetNoiseRiseMeanDb(), 1, 2), strconv.Itoa(int(cr.GetObjective().GetN())), status)
		}
		ct.Write(w)
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
		ef.GetEqualAllocationReplications(), ratio, GroupDigits(ef.GetUserSlots()), ef.GetWallTimeS())
	if ef.GetBudgetExhausted() {
		fmt.Fprint(w, "; stopped by the budget")
	}
	fmt.Fprintln(w)
}

// searchFigures are the figures of the tune and capacity CSV files.
var searchFigures = []struct {
	Key string
	Get func(*pb.TuneFigures) *pb.ReplicationEstimate
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
		h = append(h, f.Key, f.Key+"_low", f.Key+"_high")
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
		e := f.Get(fs)
		c = append(c, CSVNum(e.GetMean()), CSVNum(e.GetLow()), CSVNum(e.GetHigh()))
	}
	return c
}

func estCells(e *pb.ReplicationEstimate) []string {
	if e == nil {
		return []string{"", "", ""}
	}
	return []string{CSVNum(e.GetMean()), CSVNum(e.GetLow()), CSVNum(e.GetHigh())}
}

// TuneCSV writes one row per candidate and condition of a tuning
// recommendation.
func TuneCSV(w io.Writer, rec *pb.Recommendation) error {
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
				out = append(out, CSVNum(c.GetValue()))
			}
		}
		for len(out) < len(paths) {
			out = append(out, "")
		}
		return out
	}
	row := func(scope, cond string, weight float64, cr *pb.CandidateResult, best int32) {
		r := []string{scope, cond, CSVNum(weight), strconv.Itoa(int(cr.GetCandidate()))}
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
			r := []string{"baseline", c.GetName(), CSVNum(c.GetWeight()), ""}
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
