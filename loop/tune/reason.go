package tune

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/fadeloop/fadeloop/loop"
)

// Regimes of f_D·T used in the reasons (common practice): below
// slowFadingProduct a one-bit loop follows the channel easily and its own
// limit cycle dominates; above fastFadingProduct it cannot follow fades
// (with any feedback delay) and mostly adds noise.
const (
	slowFadingProduct = 0.005
	fastFadingProduct = 0.05
)

// FigureLabel is the one place a figure's display name and units live: every
// table header, cell and sentence of tune and capacity (and, through the
// proto's FigureLabel, every client) takes them from here.
type FigureLabel struct {
	// Key is the figure's field name in the API (TuneFigures), e.g.
	// "tx_power_mean_dbm"; "constraint_excess" for the fallback ranking.
	Key string `json:"key"`
	// Name is the display name, e.g. "mean Tx power".
	Name string `json:"name"`
	// Unit of a displayed value ("dB", "dBm", "%") and DiffUnit of a
	// displayed difference of two values: dB for differences of dB and dBm
	// figures, "percentage points" for differences of proportions, "% of
	// limit" for differences of the worst constraint excess (itself a
	// share of the limit, not a proportion of user-slots).
	Unit     string `json:"unit"`
	DiffUnit string `json:"diff_unit"`
	// Scale turns the stored value into the displayed one (100 for
	// proportions, stored in [0, 1] and shown in %; 1 otherwise).
	Scale float64 `json:"display_scale"`
	// Decimals shown in tables and text.
	Decimals int `json:"decimals"`
}

// Keys of the figures, in the field order of TuneFigures.
const (
	FigureSIRErrorMean     = "sir_error_mean_db"
	FigureSIRErrorStd      = "sir_error_std_db"
	FigureOutage           = "outage_probability"
	FigureBLER             = "achieved_bler"
	FigureTxPowerMean      = "tx_power_mean_dbm"
	FigureMaxPowerFraction = "max_power_fraction"
	FigureNoiseRise        = "noise_rise_mean_db"
	// FigureConstraintExcess is the fallback ranking (Objective.Excess),
	// shown in % of the limit.
	FigureConstraintExcess = "constraint_excess"
)

var figureLabels = []FigureLabel{
	{FigureSIRErrorMean, "SIR error mean", "dB", "dB", 1, 2},
	{FigureSIRErrorStd, "SIR error std", "dB", "dB", 1, 2},
	{FigureOutage, "outage", "%", "percentage points", 100, 2},
	{FigureBLER, "BLER", "%", "percentage points", 100, 2},
	{FigureTxPowerMean, "mean Tx power", "dBm", "dB", 1, 2},
	{FigureMaxPowerFraction, "time at max power", "%", "percentage points", 100, 2},
	{FigureNoiseRise, "noise rise", "dB", "dB", 1, 2},
	{FigureConstraintExcess, "worst constraint excess", "% of limit", "% of limit", 100, 1},
}

// FigureLabels returns the labels of the seven figures of Figures, in the
// field order of TuneFigures.
func FigureLabels() []FigureLabel {
	return append([]FigureLabel(nil), figureLabels[:7]...)
}

// FigureLabelOf returns the label of the figure with that key; it panics
// on an unknown key (a programmer error).
func FigureLabelOf(key string) FigureLabel {
	for _, l := range figureLabels {
		if l.Key == key {
			return l
		}
	}
	panic("tune: unknown figure " + key)
}

func (l FigureLabel) num(x float64) string {
	return strconv.FormatFloat(l.Scale*x, 'f', l.Decimals, 64)
}

// Value is a stored value displayed with its unit, e.g. "8.20 %".
func (l FigureLabel) Value(x float64) string { return l.num(x) + " " + l.Unit }

// Diff is a stored difference displayed with its unit, e.g. "3.20
// percentage points"; the sign is kept.
func (l FigureLabel) Diff(x float64) string { return l.num(x) + " " + l.DiffUnit }

// Interval is "[low, high] unit" of an estimate of the value.
func (l FigureLabel) Interval(e ReplicationEstimate) string {
	return "[" + l.num(e.Low) + ", " + l.num(e.High) + "] " + l.Unit
}

// Estimate is "value [low, high] unit" of an estimate of the value, the
// unit written once, e.g. "15.74 [15.23, 16.26] %"; with fewer than two
// replications, which give no interval, "15.74 % (no interval: 1
// replication)".
func (l FigureLabel) Estimate(e ReplicationEstimate) string {
	if e.N < 2 {
		return fmt.Sprintf("%s %s (no interval: %d replication)", l.num(e.Mean), l.Unit, e.N)
	}
	return l.num(e.Mean) + " " + l.Interval(e)
}

// DiffInterval is "[low, high] unit" of an estimate of a difference.
func (l FigureLabel) DiffInterval(e ReplicationEstimate) string {
	return "[" + l.num(e.Low) + ", " + l.num(e.High) + "] " + l.DiffUnit
}

func pct(x float64) string { return FigureLabelOf(FigureOutage).Value(x) }

func confText(c float64) string { return strconv.FormatFloat(100*c, 'g', 4, 64) + " %" }

func label(rec *Recommendation, k int) string { return rec.Candidates[k].Label() }

// constraintsText lists the active constraints, e.g. "outage ≤ 5.00 %,
// noise rise ≤ 6.00 dB"; bler says whether some candidate has its outer
// loop on.
func constraintsText(o Objective, bler bool) string {
	var parts []string
	if o.OutageLimit > 0 {
		parts = append(parts, "outage ≤ "+pct(o.OutageLimit))
	}
	if o.NoiseRiseLimitDB > 0 {
		parts = append(parts, "noise rise ≤ "+FigureLabelOf(FigureNoiseRise).Value(o.NoiseRiseLimitDB))
	}
	if bler && (o.Kind == ObjectiveMinTxPower || o.BLERTolerance > 0) {
		parts = append(parts, fmt.Sprintf("BLER within ±%g %% of its target", 100*o.blerTol()))
	}
	return strings.Join(parts, ", ")
}

// missesOf lists the constraints candidate figures f miss in condition name.
func missesOf(o Objective, name string, f TuneFigures) []ConstraintMiss {
	var out []ConstraintMiss
	add := func(key string, v, lim float64, upper bool) {
		l := FigureLabelOf(key)
		m := ConstraintMiss{Condition: name, Figure: key, Value: v, Limit: lim, Upper: upper, Excess: math.Abs(v - lim)}
		side, rel := "over", "a limit of"
		if !upper {
			side, rel = "under", "a floor of"
		}
		m.Text = fmt.Sprintf("%s %s against %s %s (%s %s)", l.Name, l.Value(v), rel, l.Value(lim), l.Diff(m.Excess), side)
		out = append(out, m)
	}
	if lim := o.OutageLimit; lim > 0 && f.OutageProbability.Mean > lim {
		add(FigureOutage, f.OutageProbability.Mean, lim, true)
	}
	if lim := o.NoiseRiseLimitDB; lim > 0 && f.NoiseRiseDB.Mean > lim {
		add(FigureNoiseRise, f.NoiseRiseDB.Mean, lim, true)
	}
	if t := f.BLERTarget; o.blerActive(t) {
		lo, hi := t*(1-o.blerTol()), t*(1+o.blerTol())
		switch b := f.BLER.Mean; {
		case b > hi:
			add(FigureBLER, b, hi, true)
		case b < lo:
			add(FigureBLER, b, lo, false)
		}
	}
	return out
}

// finishDecision fills the misses, warnings, headline and runner-up line of
// d, the decision over the conditions conds (one, or all for the overall
// verdict) with candidate results cands.
func finishDecision(rec *Recommendation, d *Decision, conds []int, cands []CandidateResult) {
	o := rec.Objective
	overall := len(conds) > 1
	bler := false
	for _, c := range conds {
		for _, cr := range rec.Conditions[c].Candidates {
			bler = bler || cr.Figures.BLERTarget > 0
		}
	}
	// Misses and warnings come from the recommended candidate's figures in
	// each condition.
	var highOut, infeas []string
	for _, c := range conds {
		cond := rec.Conditions[c]
		f := cond.Candidates[d.Best].Figures
		if d.ConstraintsUnmet {
			d.Misses = append(d.Misses, missesOf(o, cond.Name, f)...)
		}
		where := ""
		if overall || len(rec.Conditions) > 1 {
			where = " in " + strconv.Quote(cond.Name)
		}
		if w := o.outageWarning(); w < 1 && f.OutageProbability.Mean > w {
			highOut = append(highOut, pct(f.OutageProbability.Mean)+where)
		}
		if f.InfeasibleReplications > 0 {
			infeas = append(infeas, fmt.Sprintf("%d of %d replications%s", f.InfeasibleReplications, f.OutageProbability.N, where))
		}
	}
	best := label(rec, d.Best)
	if len(highOut) > 0 {
		d.Warnings = append(d.Warnings, Warning{Kind: WarningHighOutage, Text: fmt.Sprintf(
			"Warning: %s has outage %s, above the warning level of %s; check the link budget and the outage margin before using it.",
			best, strings.Join(highOut, ", "), pct(o.outageWarning()))})
	}
	if len(infeas) > 0 {
		d.Warnings = append(d.Warnings, Warning{Kind: WarningInfeasibleLoad, Text: fmt.Sprintf(
			"Warning: the engine found the load infeasible for %s (no powers give every user its target) in %s.",
			best, strings.Join(infeas, ", "))})
	}
	if d.Verdict == VerdictTie && rec.Effort.BudgetExhausted {
		open := 0
		for _, c := range cands {
			if c.Status == StatusContending {
				open++
			}
		}
		if open > 1 {
			d.Warnings = append(d.Warnings, Warning{Kind: WarningBudgetExhausted, Text: fmt.Sprintf(
				"The budget ran out with %d settings still in contention; more replications could separate them.", open)})
		}
	}

	rb := d.RankedBy
	conf := confText(rec.Confidence)
	scope := ""
	if overall {
		scope = fmt.Sprintf(" (weighted over %d conditions)", len(conds))
	}
	bo := cands[d.Best].Objective
	val := fmt.Sprintf("%s %s, %s interval %s", rb.Name, rb.Value(bo.Mean), conf, rb.Interval(bo))
	switch d.Verdict {
	case VerdictWinner:
		d.Headline = fmt.Sprintf("Winner%s: %s (%s).", scope, best, val)
	case VerdictTie:
		d.Headline = fmt.Sprintf("Tie of %d%s at %s: %s is recommended by the tie rule (%s); %s.",
			len(d.TieSet), scope, conf, best, d.TieBreak, val)
	case VerdictSingle:
		d.Headline = fmt.Sprintf("Single setting%s: %s (%s); nothing to compare.", scope, best, val)
	case VerdictConstraintsUnmet:
		var ms []string
		for _, m := range d.Misses {
			// Across several conditions each miss names its condition, so
			// the headline is the one place the misses are said.
			if overall {
				ms = append(ms, "in "+m.Condition+": "+m.Text)
			} else {
				ms = append(ms, m.Text)
			}
		}
		miss := strings.Join(ms, "; ")
		if miss == "" {
			miss = "within the limits on the point estimates of some conditions but not of the combination"
		}
		d.Headline = fmt.Sprintf("Constraints unmet%s: no setting meets %s. Closest: %s, which misses: %s.",
			scope, constraintsText(o, bler), best, miss)
	}
	if d.RunnerUp < 0 {
		d.RunnerUpLine = "Runner-up: none (one candidate)."
		return
	}
	ev := d.Evidence
	ru := label(rec, d.RunnerUp)
	cmp := "worse than"
	if ev.Mean < 0 {
		cmp = "better on the point estimate than"
	}
	mag := ev
	mag.Mean = math.Abs(ev.Mean)
	tail := ""
	switch {
	case d.Verdict == VerdictTie && containsInt(d.TieSet, d.RunnerUp):
		tail = "; within the tie"
	case !cands[d.RunnerUp].Feasible && cands[d.Best].Feasible:
		tail = "; it misses the constraints"
	}
	d.RunnerUpLine = fmt.Sprintf("Runner-up: %s, %s %s %s %s (%s interval of the difference %s, %d paired replications%s).",
		ru, rb.Name, rb.Diff(mag.Mean), cmp, best, conf, rb.DiffInterval(ev), ev.N, tail)
}

func containsInt(xs []int, v int) bool {
	for _, x := range xs {
		if x == v {
			return true
		}
	}
	return false
}

// fdtText describes the f_D·T of a condition from its own speeds, e.g.
// "f_D·T = 0.037 (30 km/h)" or "f_D·T 0.0037–0.074 over 3 and 60 km/h".
func fdtText(cr ConditionResult) string {
	var sp []string
	for _, v := range cr.SpeedsKmh {
		sp = append(sp, strconv.FormatFloat(v, 'g', 4, 64))
	}
	speeds := ""
	switch len(sp) {
	case 0:
	case 1:
		speeds = sp[0] + " km/h"
	default:
		speeds = strings.Join(sp[:len(sp)-1], ", ") + " and " + sp[len(sp)-1] + " km/h"
	}
	g := func(x float64) string { return strconv.FormatFloat(x, 'g', 2, 64) }
	if len(sp) <= 1 || g(cr.DopplerProductMin) == g(cr.DopplerProductMax) {
		if speeds == "" {
			return "f_D·T = " + g(cr.DopplerProductMax)
		}
		return fmt.Sprintf("f_D·T = %s (%s)", g(cr.DopplerProductMax), speeds)
	}
	return fmt.Sprintf("f_D·T %s–%s over %s", g(cr.DopplerProductMin), g(cr.DopplerProductMax), speeds)
}

func regime(x float64) int {
	switch {
	case x < slowFadingProduct:
		return 0
	case x > fastFadingProduct:
		return 2
	}
	return 1
}

// stepHint explains the chosen step from the condition's f_D·T range and
// the measured differences to the neighbouring steps.
func stepHint(rec *Recommendation, c int) string {
	const path = StepPath
	cr := rec.Conditions[c]
	d := cr.Decision
	p := rec.Candidates[d.Best]
	step, ok := p.Value(path)
	if !ok {
		return ""
	}
	var vals []float64
	for _, a := range rec.Axes {
		if a.Path == path {
			vals = append(vals, a.Values...)
		}
	}
	if len(vals) < 2 {
		return ""
	}
	sort.Float64s(vals)
	lo, hi := vals[0], vals[len(vals)-1]
	fdt := fdtText(cr)
	// The measured neighbours: candidates equal to Best but for the step.
	rb := d.RankedBy
	var nb []string
	ruledOut := false
	i := sort.SearchFloat64s(vals, step)
	for _, k := range d.Ordering {
		q := rec.Candidates[k]
		v, _ := q.Value(path)
		if k == d.Best || !sameBut(p, q, path) {
			continue
		}
		if (i > 0 && v == vals[i-1]) || (i+1 < len(vals) && v == vals[i+1]) {
			c := cr.Candidates[k]
			x := fmt.Sprintf("%g dB step %s%s", v, sign(c.DiffToBest.Mean), rb.Diff(math.Abs(c.DiffToBest.Mean)))
			if !c.Feasible && !d.ConstraintsUnmet {
				x += " (misses the constraints)"
				ruledOut = ruledOut || c.DiffToBest.Mean < 0
			}
			nb = append(nb, x)
		}
	}
	var s string
	rlo, rhi := regime(cr.DopplerProductMin), regime(cr.DopplerProductMax)
	if cr.DopplerProductMax <= 3*cr.DopplerProductMin {
		// A narrow range (e.g. 3 and 5 km/h) is one regime: its middle's.
		rlo = regime(math.Sqrt(cr.DopplerProductMin * cr.DopplerProductMax))
		rhi = rlo
	}
	switch {
	case d.ConstraintsUnmet:
		// Ranked by constraint excess: no claim about tracking.
	case ruledOut:
		s = fmt.Sprintf("At %s a neighbouring step scores better on %s but misses the constraints.", fdt, rb.Name)
	case rlo != rhi:
		s = fmt.Sprintf("%s spans more than one fading regime; over all its users a %g dB step did best.", fdt, step)
	case step == lo && rlo == 2:
		s = fmt.Sprintf("At %s the loop cannot follow the fades, so the smallest step does best: it adds the least noise.", fdt)
	case step == lo && rlo == 0:
		s = fmt.Sprintf("At %s the channel moves slowly; the smallest step keeps up and keeps the ±step/2 limit cycle small.", fdt)
	case step == lo:
		s = fmt.Sprintf("At %s the smallest step in the grid is enough to follow the fades.", fdt)
	case step == hi:
		s = fmt.Sprintf("At %s the largest step in the grid does best; larger steps or a higher update rate may do better still.", fdt)
	default:
		s = fmt.Sprintf("At %s a %g dB step balances tracking the fades against limit-cycle noise.", fdt, step)
	}
	if len(nb) > 0 {
		s = join(s, fmt.Sprintf("Measured %s against it: %s.", rb.Name, strings.Join(nb, ", ")))
	}
	return s
}

func sign(x float64) string {
	if x < 0 {
		return "-"
	}
	return "+"
}

// sameBut reports whether a and b have equal coordinates except on path.
func sameBut(a, b Point, path string) bool {
	if len(a.Coords) != len(b.Coords) {
		return false
	}
	for i := range a.Coords {
		if a.Coords[i].Path != path && a.Coords[i].Value != b.Coords[i].Value {
			return false
		}
	}
	return true
}

// baselineText compares the recommended setting with fixed power on the
// judged figure, in that figure's units.
func baselineText(rec *Recommendation, c int, bl *Baseline) string {
	l := bl.Figure
	conf := confText(rec.Confidence)
	dir := "lower"
	if bl.Gain.Mean < 0 {
		dir = "higher"
	}
	gain := fmt.Sprintf("%s %s (%s interval of the gain %s)", l.Diff(math.Abs(bl.Gain.Mean)), dir, conf, l.DiffInterval(bl.Gain))
	cr := rec.Conditions[c]
	best := cr.Candidates[cr.Decision.Best].Figures
	if l.Key == FigureTxPowerMean {
		s := fmt.Sprintf("Fixed power: mean Tx power %s with outage %s; the recommended setting: %s with outage %s, %s.",
			l.Value(bl.Fixed.Mean), pct(bl.Figures.OutageProbability.Mean), l.Value(bl.Recommended.Mean), pct(best.OutageProbability.Mean), gain)
		if ms := missesOf(rec.Objective, cr.Name, bl.Figures); len(ms) > 0 {
			var t []string
			for _, m := range ms {
				t = append(t, m.Text)
			}
			s += " Fixed power misses the constraints (" + strings.Join(t, "; ") + "), so the power figures are not comparable: power control is what meets them"
			if !cr.Candidates[cr.Decision.Best].Feasible {
				s += " as closely as the grid allows"
			}
			s += "."
		}
		return s
	}
	return fmt.Sprintf("Fixed power: %s %s; the recommended setting: %s, %s.",
		l.Name, l.Value(bl.Fixed.Mean), l.Value(bl.Recommended.Mean), gain)
}

func baselineHint(rec *Recommendation, c int) string {
	cr := rec.Conditions[c]
	bl := cr.Baseline
	if bl == nil {
		return ""
	}
	if !bl.BarelyHelps || bl.FixedMisses {
		return bl.Text
	}
	why := "estimation error, delay or load dominate"
	if cr.DopplerProductMin > fastFadingProduct {
		why = fmt.Sprintf("at %s the loop cannot track the fades", fdtText(cr))
	}
	verb := "barely helps"
	if bl.Gain.Mean <= 0 {
		verb = "does not help (it barely helps at best)"
	}
	return fmt.Sprintf("%s Power control %s here: %s.", bl.Text, verb, why)
}

func constraintHint(rec *Recommendation, d Decision, cands []CandidateResult) string {
	if !rec.Objective.constrained() || d.ConstraintsUnmet {
		return ""
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
	bler := false
	for _, cr := range rec.Conditions {
		for _, c := range cr.Candidates {
			bler = bler || c.Figures.BLERTarget > 0
		}
	}
	return fmt.Sprintf("%d of %d settings miss %s.", miss, len(cands), constraintsText(rec.Objective, bler))
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

func warningsText(d Decision) string {
	var w []string
	for _, x := range d.Warnings {
		w = append(w, x.Text)
	}
	return strings.Join(w, " ")
}

// conditionReason is the plain-language reason of condition c: the headline
// first (so an unmet constraint is said first), then the evidence, the
// constraints, the step against the condition's own f_D·T range, the
// fixed-power comparison and the warnings.
func conditionReason(rec *Recommendation, c int) string {
	cr := rec.Conditions[c]
	d := cr.Decision
	return join(
		d.Headline,
		d.RunnerUpLine,
		constraintHint(rec, d, cr.Candidates),
		stepHint(rec, c),
		baselineHint(rec, c),
		warningsText(d),
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
		per = append(per, fmt.Sprintf("%s (%s): %s", cr.Name, fdtText(cr), label(rec, cr.Decision.Best)))
		if cr.Decision.Best != d.Best {
			same = false
		}
	}
	tail := "The same setting is recommended in every condition."
	if !same {
		tail = "Per condition: " + strings.Join(per, "; ") + "."
	}
	return join(
		d.Headline,
		d.RunnerUpLine,
		constraintHint(rec, d, rec.OverallCandidates),
		tail,
		warningsText(d),
	)
}

// Lines returns the text block every table output of a recommendation
// starts with, in order: the overall headline (an unmet constraint first),
// the runner-up line, the warnings, the tie rule when a tie was broken, and
// the notice. Clients print these lines as they are.
func (r *Recommendation) Lines() []string {
	d := r.Overall
	out := []string{d.Headline, d.RunnerUpLine}
	for _, w := range d.Warnings {
		out = append(out, w.Text)
	}
	if d.Verdict == VerdictTie {
		out = append(out, "Tie rule: "+r.TieRule+".")
	}
	return append(out, loop.Caution)
}
