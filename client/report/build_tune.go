package report

import (
	"fmt"
	"strconv"
	"strings"

	clirender "github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// The page of a tuning recommendation: verdict, conditions, candidates.

func decisionText(dc *pb.Decision) (string, string) {
	switch {
	case dc.GetConstraintsUnmet():
		return "no candidate meets the constraints; ranked by worst constraint excess", "bad"
	case dc.GetDeclared():
		return "declared winner", "ok"
	case len(dc.GetTieSet()) > 1:
		return fmt.Sprintf("tie of %d, picked by the tie rule", len(dc.GetTieSet())), "warn"
	}
	return "not separated from the runner-up at this budget", "warn"
}

// rankedLabel is the label of the figure a decision ranked by — the
// objective's, or the worst constraint excess (% of limit) when no
// candidate met the constraints — as the CLI's tables head their column;
// results without it fall back to the objective's label.
func rankedLabel(dc *pb.Decision, rec *pb.Recommendation) *pb.FigureLabel {
	if l := dc.GetRankedBy(); l.GetKey() != "" {
		return l
	}
	return clirender.SearchLabel(rec.GetFigures(), clirender.ObjectiveKey(rec.GetObjective().GetKind()))
}

// labelScaleDec is a label's display scale (1 when unset) and decimals.
func labelScaleDec(l *pb.FigureLabel) (float64, int) {
	sc := l.GetDisplayScale()
	if sc == 0 {
		sc = 1
	}
	return sc, int(l.GetDecimals())
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
	d.Verdict = verdict{Class: class, Headline: "Use " + clirender.PointLabel(ov.GetSetting()) + " (" + state + ")"}
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
				clirender.PointLabel(cands[ru]), num(scale*ev.GetMean(), dec), unit, oname, 100*conf,
				num(scale*ev.GetLow(), dec), num(scale*ev.GetHigh(), dec), ev.GetN()))
		} else {
			d.Verdict.Lines = append(d.Verdict.Lines, "No runner-up (one candidate).")
		}
		if ts := ov.GetTieSet(); len(ts) > 1 {
			var names []string
			for _, i := range ts {
				if int(i) < len(cands) {
					names = append(names, clirender.PointLabel(cands[i]))
				}
			}
			d.Verdict.Lines = append(d.Verdict.Lines, "Tie set: "+strings.Join(names, "; ")+". Tie rule: "+rec.GetTieRule())
		}
		if r := ov.GetReason(); r != "" {
			d.Verdict.Lines = append(d.Verdict.Lines, "Why: "+r)
		}
	}

	// The ranked figure's column is headed by what it holds, as in the
	// CLI: the objective, or the worst constraint excess (% of limit) when
	// no candidate met the constraints; with mixed figures each cell
	// names its own.
	rb := rankedLabel(ov, rec)
	objHead, diffHead, mixed := clirender.LabelHead(rb), "runner-up − recommended ("+rb.GetDiffUnit()+")", false
	for _, c := range rec.GetConditions() {
		if rankedLabel(c.GetDecision(), rec).GetKey() != rb.GetKey() {
			objHead, diffHead, mixed = "ranked figure", "runner-up − recommended", true
		}
	}
	ct := table{Caption: fmt.Sprintf("Per condition: the recommended setting, the figure it was ranked by, the paired difference to the runner-up and the fixed-power baseline (%g %% intervals).", 100*conf),
		Head: []string{"condition", "weight", "recommended", "verdict", objHead, diffHead, "fixed power", "gain over fixed", "f_D·T"}}
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
		dl := rankedLabel(dc, rec)
		dsc, ddec := labelScaleDec(dl)
		diff := "–"
		if dc.GetRunnerUp() >= 0 {
			diff = repEstimate(dc.GetEvidence(), dsc, ddec)
			if mixed {
				diff += " " + dl.GetDiffUnit()
			}
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
		obj := repEstimate(best.GetObjective(), dsc, ddec)
		if mixed {
			obj = dl.GetName() + " " + obj + " " + dl.GetUnit()
		}
		ct.add(false, c.GetName(), strconv.FormatFloat(c.GetWeight(), 'g', 4, 64), clirender.PointLabel(dc.GetSetting()), v,
			obj, diff, base, gain, clirender.FdtCell(c))
	}
	s := section{ID: "conditions", Heading: "Conditions", Tables: []table{ct}}
	if n := clirender.NoBaselineNote(req, rec); n != "" {
		s.Notes = append(s.Notes, n)
	}
	// Per condition what the CLI prints under it (measured facts, not the
	// engine's reason); one condition's decision lines are the verdict's.
	for _, c := range rec.GetConditions() {
		ls := clirender.ConditionLines(c, rec.GetTieRule(), len(rec.GetConditions()) > 1)
		s.Notes = append(s.Notes, c.GetName()+": "+strings.Join(ls, " "))
	}
	d.Sections = append(d.Sections, s)

	cs := section{ID: "candidates", Heading: "Candidates"}
	if oc := rec.GetOverallCandidates(); len(oc) > 0 && len(rec.GetConditions()) > 1 {
		cs.Tables = append(cs.Tables, candidateTable("Weighted over all conditions; the recommended setting is marked.", clirender.OrderedCandidates(ov, oc), rec, ov, true))
	}
	for _, c := range rec.GetConditions() {
		cs.Tables = append(cs.Tables, candidateTable("Condition "+c.GetName()+"; its recommended setting is marked and listed first.", clirender.OrderedCandidates(c.GetDecision(), c.GetCandidates()), rec, c.GetDecision(), false))
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
		eq = fmt.Sprintf("; equal allocation to the same precision: %s %s (this used %s %% of it)",
			thousands(n), plural(n, "run", "runs"), num(100*float64(e.GetReplications())/float64(n), 0))
	}
	effort := fmt.Sprintf("%s %s + %s %s in %s (at most %s of one candidate)%s; %s user-slots in %s s",
		thousands(e.GetReplications()), plural(e.GetReplications(), "candidate run", "candidate runs"),
		thousands(e.GetBaselineReplications()), plural(e.GetBaselineReplications(), "fixed-power run", "fixed-power runs"),
		clirender.Count(int(e.GetStages()), "round", "rounds"), clirender.Count(int(e.GetMaxReplicationsUsed()), "replication", "replications"), eq,
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

// candidateTable lists candidates with the figure decision dc ranked them
// by (the objective, or the worst constraint excess in % of limit when no
// candidate met the constraints), the difference to the recommended one
// and their figures (the ranked figure is not repeated; with the excess
// ranking the objective's own figure, e.g. the mean Tx power, is shown
// among them). overall: the weighted table, which has no per-figure values.
func candidateTable(caption string, crs []*pb.CandidateResult, rec *pb.Recommendation, dc *pb.Decision, overall bool) table {
	cands := rec.GetCandidates()
	best := dc.GetBest()
	rl := rankedLabel(dc, rec)
	scale, dec := labelScaleDec(rl)
	var cols []*pb.FigureLabel
	for _, key := range clirender.CandidateFigures {
		if key != rl.GetKey() {
			cols = append(cols, clirender.SearchLabel(rec.GetFigures(), key))
		}
	}
	if overall {
		cols = nil
	}
	t := table{Caption: caption, Head: []string{"#", "setting", clirender.LabelHead(rl), "− recommended (" + rl.GetDiffUnit() + ")"}}
	for _, c := range cols {
		t.Head = append(t.Head, clirender.LabelHead(c))
	}
	// Multi-cell: f of each candidate, as the CLI's condition tables.
	withF := !overall && clirender.CandidatesHaveF(crs)
	if withF {
		t.Head = append(t.Head, clirender.LayoutFigureF.Label)
		t.Caption += " " + clirender.TuneFNote + "."
	}
	t.Head = append(t.Head, "n", "status")
	t.Num = numCols(len(t.Head), append([]int{0}, rangeFrom(2, len(t.Head)-1)...)...)
	for _, cr := range crs {
		f := cr.GetFigures()
		status := clirender.StatusName(cr.GetStatus())
		if !cr.GetFeasible() {
			status += ", misses constraints" // as the CLI; "infeasible" is the engine's load flag
		}
		label := "candidate " + strconv.Itoa(int(cr.GetCandidate()))
		if i := cr.GetCandidate(); i >= 0 && int(i) < len(cands) {
			label = clirender.PointLabel(cands[i])
		}
		diff := repEstimate(cr.GetDiffToBest(), scale, dec) // as the CLI: the paired difference with its interval
		if cr.GetCandidate() == best {
			diff = "–" // the reference itself, as in the CLI
		}
		row := []string{strconv.Itoa(int(cr.GetCandidate())), label, repEstimate(cr.GetObjective(), scale, dec), diff}
		for _, c := range cols {
			row = append(row, repEstimate(clirender.SearchFigure(f, c.GetKey()), c.GetDisplayScale(), int(c.GetDecimals())))
		}
		if withF {
			row = append(row, repEstimate(f.GetOtherToOwn(), clirender.LayoutFigureF.Scale, clirender.LayoutFigureF.Dec))
		}
		row = append(row, strconv.Itoa(int(cr.GetObjective().GetN())), status)
		t.add(cr.GetCandidate() == best, row...)
	}
	return t
}

// tuneReplications is the replications a tune search ran per candidate
// and condition, e.g. "2 per candidate (sequential: 2 first, at most 4)" or
// "2–6 per candidate (…)" when some candidates got more ("" without the
// request). The budget's zeros mean 2 and max(32, min) (TuneBudget).
func tuneReplications(rec *pb.Recommendation, req *pb.TuneRequest) string {
	if req == nil {
		return ""
	}
	lo := req.GetBudget().GetMinReplications()
	if lo == 0 {
		lo = 2
	}
	hi := req.GetBudget().GetMaxReplications()
	if hi == 0 {
		hi = max(32, lo)
	}
	used := fmt.Sprint(lo)
	if u := rec.GetEffort().GetMaxReplicationsUsed(); u > lo {
		used = fmt.Sprintf("%d–%d", lo, u)
	}
	return fmt.Sprintf("%s per candidate (sequential: %d first, at most %d)", used, lo, hi)
}
