package tune

import (
	"fmt"
	"math"
	"strings"
)

// Regimes of f_D·T used in the reasons (common practice): below
// slowFadingProduct a one-bit loop follows the channel easily and its own
// limit cycle dominates; above fastFadingProduct it cannot follow fades
// (with any feedback delay) and mostly adds noise.
const (
	slowFadingProduct = 0.005
	fastFadingProduct = 0.05
)

func (o Objective) unitValue(x float64) string {
	switch o.Kind {
	case ObjectiveMinOutage:
		return fmt.Sprintf("%.3g %%", 100*x)
	case ObjectiveMinTxPower:
		return fmt.Sprintf("%.2f dBm", x)
	default:
		return fmt.Sprintf("%.2f dB", x)
	}
}

func (o Objective) unitDiff(x float64) string {
	if o.Kind == ObjectiveMinOutage {
		return fmt.Sprintf("%.3g percentage points", 100*x)
	}
	return fmt.Sprintf("%.2f dB", x)
}

func (o Objective) interval(e Estimate) string {
	if o.Kind == ObjectiveMinOutage {
		return fmt.Sprintf("[%.3g, %.3g] %%", 100*e.Low, 100*e.High)
	}
	return fmt.Sprintf("[%.2f, %.2f]", e.Low, e.High)
}

func (o Objective) figureName(fallback bool) string {
	if fallback {
		return "outage probability"
	}
	return o.Kind.String()
}

func pct(x float64) string { return fmt.Sprintf("%.3g %%", 100*x) }

// verdict is the first sentence of a reason: winner, tie or single setting.
func verdict(rec *Recommendation, d Decision, cands []CandidateResult, scope string) string {
	obj := rec.Objective
	name := obj.figureName(d.ConstraintsUnmet)
	if d.ConstraintsUnmet {
		obj = Objective{Kind: ObjectiveMinOutage}
	}
	best := cands[d.Best]
	conf := fmt.Sprintf("%g %%", 100*rec.Confidence)
	if d.RunnerUp < 0 {
		return fmt.Sprintf("%s%s is the only setting: %s %s %s.", scope, rec.Candidates[d.Best].Label(), name,
			obj.unitValue(best.Objective.Mean), obj.interval(best.Objective))
	}
	ru := rec.Candidates[d.RunnerUp].Label()
	ev := d.Evidence
	if d.Declared {
		return fmt.Sprintf("%s%s wins on %s with %s %s; the runner-up %s is %s worse (paired over %d replications, %s interval %s).",
			scope, rec.Candidates[d.Best].Label(), name, obj.unitValue(best.Objective.Mean), obj.interval(best.Objective),
			ru, obj.unitDiff(ev.Mean), ev.N, conf, obj.interval(ev))
	}
	key := "it is the leader"
	if d.Best != d.Leader {
		key = tieKey(rec.Candidates[d.Best], rec.Candidates[d.Leader])
	} else {
		for _, k := range d.TieSet[1:] {
			key = tieKey(rec.Candidates[d.Best], rec.Candidates[k])
			break
		}
	}
	return fmt.Sprintf("%s%d settings cannot be told apart on %s at %s (runner-up %s differs from the leader by %s, interval %s, %d replications); %s is picked by the tie rule (%s).",
		scope, len(d.TieSet), name, conf, ru, obj.unitDiff(ev.Mean), obj.interval(ev), ev.N,
		rec.Candidates[d.Best].Label(), key)
}

// stepHint explains where the chosen step sits in the step axis.
func stepHint(rec *Recommendation, c int) string {
	cr := rec.Conditions[c]
	p := rec.Candidates[cr.Decision.Best]
	step, ok := p.Value("inner_loop.step_db")
	if !ok {
		return ""
	}
	var vals []float64
	for _, a := range rec.Axes {
		if a.Path == "inner_loop.step_db" {
			vals = a.Values
		}
	}
	if len(vals) < 2 {
		return ""
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range vals {
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	fdT := cr.DopplerProductMax
	switch {
	case step == lo && fdT > fastFadingProduct:
		return fmt.Sprintf("At f_D·T = %.3g the loop cannot follow the fades, so the smallest step wins: it only adds less noise.", fdT)
	case step == lo && fdT < slowFadingProduct:
		return fmt.Sprintf("At f_D·T = %.3g the channel moves slowly; a small step keeps up and keeps the ±step/2 limit cycle small.", fdT)
	case step == lo:
		return fmt.Sprintf("At f_D·T = %.3g the smallest step is enough to follow the fades and adds the least limit-cycle noise.", fdT)
	case step == hi:
		return fmt.Sprintf("The largest step in the grid wins: at f_D·T = %.3g smaller steps lag the fades. Try larger steps or a higher update rate.", fdT)
	default:
		return fmt.Sprintf("%g dB is the balance at f_D·T = %.3g: smaller steps lag the fades, larger ones add limit-cycle noise.", step, fdT)
	}
}

func baselineHint(rec *Recommendation, c int) string {
	cr := rec.Conditions[c]
	bl := cr.Baseline
	if bl == nil {
		return ""
	}
	best := cr.Candidates[cr.Decision.Best].Figures
	judged, fb, fc := "outage", pct(bl.Figures.OutageProb.Mean), pct(best.OutageProb.Mean)
	if rec.Objective.Kind == ObjectiveMinSIRErrorStd {
		judged = "SIR error std"
		fb = fmt.Sprintf("%.2f dB", bl.Figures.SIRErrorStdDB.Mean)
		fc = fmt.Sprintf("%.2f dB", best.SIRErrorStdDB.Mean)
	}
	if bl.BarelyHelps {
		why := "estimation error, delay or load dominate"
		if cr.DopplerProductMax > fastFadingProduct {
			why = fmt.Sprintf("at f_D·T = %.3g the loop cannot track", cr.DopplerProductMax)
		}
		verb := "barely helps"
		if bl.Gain.Mean <= 0 {
			verb = "does not help (barely helps at best)"
		}
		return fmt.Sprintf("Power control %s here: fixed power gives %s %s, the best loop setting %s (%s).", verb, judged, fb, fc, why)
	}
	return fmt.Sprintf("Against fixed power the loop takes %s from %s to %s.", judged, fb, fc)
}

func constraintHint(rec *Recommendation, d Decision, cands []CandidateResult) string {
	o := rec.Objective
	if o.Kind != ObjectiveMinTxPower {
		return ""
	}
	if d.ConstraintsUnmet {
		return fmt.Sprintf("No setting keeps outage at or below %s with the BLER within ±%g %% of target; ranked by outage instead.",
			pct(o.OutageLimit), 100*o.blerTol())
	}
	miss := 0
	for _, c := range cands {
		if !c.Feasible {
			miss++
		}
	}
	if miss == 0 {
		return ""
	}
	return fmt.Sprintf("%d of %d settings miss outage ≤ %s or the BLER tolerance.", miss, len(cands), pct(o.OutageLimit))
}

func budgetHint(rec *Recommendation, d Decision, cands []CandidateResult) string {
	if d.Declared || !rec.Effort.BudgetExhausted {
		return ""
	}
	open := 0
	for _, c := range cands {
		if c.Status == StatusContending {
			open++
		}
	}
	if open <= 1 {
		return ""
	}
	return fmt.Sprintf("The budget ran out with %d settings still in contention; more replications could separate them.", open)
}

func join(parts ...string) string {
	var out []string
	for _, p := range parts {
		if p != "" {
			out = append(out, p)
		}
	}
	return strings.Join(out, " ")
}

// conditionReason is the plain-language reason of condition c.
func conditionReason(rec *Recommendation, c int) string {
	cr := rec.Conditions[c]
	d := cr.Decision
	return join(
		verdict(rec, d, cr.Candidates, ""),
		constraintHint(rec, d, cr.Candidates),
		stepHint(rec, c),
		baselineHint(rec, c),
		budgetHint(rec, d, cr.Candidates),
	)
}

// overallReason is the plain-language reason across conditions.
func overallReason(rec *Recommendation) string {
	if len(rec.Conditions) == 1 {
		return rec.Conditions[0].Decision.Reason
	}
	d := rec.Overall
	var per []string
	same := true
	for _, cr := range rec.Conditions {
		per = append(per, fmt.Sprintf("%s → %s", cr.Name, rec.Candidates[cr.Decision.Best].Label()))
		if cr.Decision.Best != d.Best {
			same = false
		}
	}
	tail := "The same setting is best in every condition."
	if !same {
		tail = "Per condition: " + strings.Join(per, "; ") + "."
	}
	return join(
		verdict(rec, d, rec.OverallCandidates, fmt.Sprintf("Weighted over %d conditions, ", len(rec.Conditions))),
		constraintHint(rec, d, rec.OverallCandidates),
		tail,
		budgetHint(rec, d, rec.OverallCandidates),
	)
}
