package render

import (
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
	"strings"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// PointLabel is "step_db=0.5, update_rate_hz=1500" ("base setting" without
// axes).
func PointLabel(p *pb.GridPoint) string {
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

// labelScale is a label's display scale (1 when unset) and decimals.
func labelScale(l *pb.FigureLabel) (float64, int) {
	sc := l.GetDisplayScale()
	if sc == 0 {
		sc = 1
	}
	return sc, int(l.GetDecimals())
}

// shortUnit abbreviates a unit for a column head ("percentage points" is
// "pp"; the legend under the table spells it out).
func shortUnit(u string) string {
	if u == "percentage points" {
		return "pp"
	}
	return u
}

// LabelHead is "mean Tx power (dBm)", a column head from an API label.
func LabelHead(l *pb.FigureLabel) string {
	return l.GetName() + " (" + shortUnit(l.GetUnit()) + ")"
}

// labelCell is a value with its interval, "2.52 [2.47, 2.57]", in the
// label's display units; diff selects the difference unit's scale (the
// same display scale: dB stays dB, proportions become percentage points).
func labelCell(e *pb.ReplicationEstimate, l *pb.FigureLabel) string {
	if e == nil {
		return "–"
	}
	sc, dec := labelScale(l)
	return estCell(e, sc, dec)
}

// estCell is "1.98 [1.95, 2.02]", scaled: the value and its interval
// (asymmetric intervals stay asymmetric); the value alone with fewer than
// two replications.
func estCell(e *pb.ReplicationEstimate, scale float64, dec int) string {
	if e == nil {
		return "–"
	}
	v, lo, hi := scale*e.GetMean(), scale*e.GetLow(), scale*e.GetHigh()
	if e.GetN() < 2 {
		return Num(v, dec)
	}
	return withInterval(v, lo, hi, dec)
}

var statusNames = map[pb.CandidateStatus]string{
	pb.CandidateStatus_CANDIDATE_STATUS_CONTENDING: "contending",
	pb.CandidateStatus_CANDIDATE_STATUS_DROPPED:    "dropped",
	pb.CandidateStatus_CANDIDATE_STATUS_EQUIVALENT: "equivalent",
}

// StatusName is a candidate status in tables: "contending", "dropped",
// "equivalent" ("" when unset).
func StatusName(s pb.CandidateStatus) string { return statusNames[s] }

// VerdictName is the verdict column of tables and CSV: "winner", "tie of
// N", "constraints unmet", "single setting".
func VerdictName(d *pb.Decision) string {
	switch d.GetVerdict() {
	case pb.Verdict_VERDICT_WINNER:
		return "winner"
	case pb.Verdict_VERDICT_TIE:
		return fmt.Sprintf("tie of %d", len(d.GetTieSet()))
	case pb.Verdict_VERDICT_CONSTRAINTS_UNMET:
		return "constraints unmet"
	case pb.Verdict_VERDICT_SINGLE:
		return "single setting"
	}
	return "not stated"
}

// VerdictKey is the machine-readable verdict of CSV files: "winner",
// "tie", "constraints_unmet", "single" ("" when unset).
func VerdictKey(d *pb.Decision) string {
	if d.GetVerdict() == pb.Verdict_VERDICT_UNSPECIFIED {
		return ""
	}
	return strings.ToLower(strings.TrimPrefix(d.GetVerdict().String(), "VERDICT_"))
}

// OrderedCandidates returns a scope's candidate results in the decision's ordering
// (recommended first); results the ordering does not name follow in
// their own order.
func OrderedCandidates(d *pb.Decision, crs []*pb.CandidateResult) []*pb.CandidateResult {
	by := make(map[int32]*pb.CandidateResult, len(crs))
	for _, cr := range crs {
		by[cr.GetCandidate()] = cr
	}
	out := make([]*pb.CandidateResult, 0, len(crs))
	seen := make(map[int32]bool, len(crs))
	for _, k := range d.GetOrdering() {
		if cr, ok := by[k]; ok && !seen[k] {
			out = append(out, cr)
			seen[k] = true
		}
	}
	for _, cr := range crs {
		if !seen[cr.GetCandidate()] {
			out = append(out, cr)
		}
	}
	return out
}

// DecisionLines are the lines every text output of a decision prints, in
// the API's order: headline (an unmet constraint is said there first),
// the closest setting's misses the headline does not already say, the
// runner-up, each warning, and for a tie the tie rule. None is composed
// here.
func DecisionLines(d *pb.Decision, tieRule string) []string {
	var ls []string
	if d.GetHeadline() != "" {
		ls = append(ls, d.GetHeadline())
	}
	if d.GetVerdict() == pb.Verdict_VERDICT_CONSTRAINTS_UNMET {
		for _, m := range d.GetMisses() {
			t := m.GetText()
			if t != "" && strings.Contains(d.GetHeadline(), t) {
				continue // the headline says it (with its condition across several)
			}
			if m.GetCondition() != "" {
				t = "in " + m.GetCondition() + ": " + t
			}
			ls = append(ls, "Closest setting misses, "+t)
		}
	}
	if d.GetRunnerUpLine() != "" {
		ls = append(ls, d.GetRunnerUpLine())
	}
	for _, wn := range d.GetWarnings() {
		ls = append(ls, wn.GetText())
	}
	if d.GetVerdict() == pb.Verdict_VERDICT_TIE && tieRule != "" {
		ls = append(ls, "Tie rule: "+tieRule)
	}
	return ls
}

// TuneTable writes a tuning recommendation for people, every verdict,
// sentence and unit taken from the Recommendation: the overall decision's
// lines, one row per condition (its recommended setting and verdict), and
// per condition every candidate, recommended first, in the decision's
// ordering.
func TuneTable(w io.Writer, req *pb.TuneRequest, rec *pb.Recommendation) {
	conf := rec.GetConfidence()
	cands := rec.GetCandidates()
	ov := rec.GetOverall()
	if n := req.GetBase().GetName(); n != "" {
		fmt.Fprintln(w, n)
	}
	objName := ov.GetRankedBy().GetName()
	if l := FigureLabelOf(rec.GetFigures(), ObjectiveKey(rec.GetObjective().GetKind())); l != nil {
		objName = l.GetName()
	}
	fmt.Fprintf(w, "minimise %s; %s × %s; confidence %g %%; seed %d\n\n",
		objName, Count(len(cands), "candidate", "candidates"), Count(len(rec.GetConditions()), "condition", "conditions"), 100*conf, rec.GetSeed())
	fmt.Fprintf(w, "Verdict: %s\n", VerdictName(ov))
	for _, l := range DecisionLines(ov, rec.GetTieRule()) {
		fmt.Fprintln(w, Wrap(l, 78, "  "))
	}
	if len(rec.GetConditions()) > 1 {
		var ws []string
		for _, c := range rec.GetConditions() {
			ws = append(ws, fmt.Sprintf("%s (weight %g)", c.GetName(), c.GetWeight()))
		}
		fmt.Fprintln(w, Wrap("Weighted over "+strings.Join(ws, ", ")+".", 78, "  "))
	}
	if n := rec.GetNotice(); n != "" {
		fmt.Fprintln(w, Wrap(n, 78, "  "))
	}
	fmt.Fprintln(w)

	pp, anyF := false, false
	rb := ov.GetRankedBy()
	diffHead := func(l *pb.FigureLabel) string {
		u := l.GetDiffUnit()
		if u == "percentage points" {
			pp = true
		}
		return " (" + shortUnit(u) + ")"
	}
	objHead := LabelHead(rb)
	for _, c := range rec.GetConditions() {
		if c.GetDecision().GetRankedBy().GetKey() != rb.GetKey() {
			objHead = "ranked figure"
		}
	}
	diffH := "runner-up − recommended" + diffHead(rb)
	if objHead != LabelHead(rb) {
		diffH = "runner-up − recommended" // mixed units: each cell carries its own
	}
	t := NewTable("condition", "weight", "recommended", "verdict", objHead, diffH,
		"fixed power", "gain over fixed", "f_D·T")
	t.AlignRight(1, 4, 5, 6, 7, 8)
	for _, c := range rec.GetConditions() {
		d := c.GetDecision()
		dl := d.GetRankedBy()
		var best *pb.CandidateResult
		for _, cr := range c.GetCandidates() {
			if cr.GetCandidate() == d.GetBest() {
				best = cr
			}
		}
		diff := "–"
		if d.GetRunnerUp() >= 0 && d.GetEvidence() != nil {
			diff = labelCell(d.GetEvidence(), dl) + " " + shortUnit(dl.GetDiffUnit())
			if dl.GetDiffUnit() == "percentage points" {
				pp = true
			}
		}
		base, gain := "–", "–"
		if b := c.GetBaseline(); b != nil {
			bl := b.GetFigure()
			base = labelCell(b.GetFixed(), bl) + " " + bl.GetUnit()
			gain = labelCell(b.GetGain(), bl) + " " + shortUnit(bl.GetDiffUnit())
			if bl.GetDiffUnit() == "percentage points" {
				pp = true
			}
			if b.GetFixedMisses() {
				gain += " (fixed misses the constraints)"
			} else if b.GetBarelyHelps() {
				gain += " (barely helps)"
			}
		}
		obj := labelCell(best.GetObjective(), dl)
		if objHead != LabelHead(rb) {
			obj = dl.GetName() + " " + obj + " " + dl.GetUnit()
		}
		t.Add(c.GetName(), strconv.FormatFloat(c.GetWeight(), 'g', 4, 64), PointLabel(d.GetSetting()), VerdictName(d),
			obj, diff, base, gain, FdtCell(c))
	}
	t.Write(w)
	if n := NoBaselineNote(req, rec); n != "" {
		fmt.Fprintln(w, Wrap(n, 78, "  "))
	}
	fmt.Fprintln(w)
	for _, c := range rec.GetConditions() {
		d := c.GetDecision()
		dl := d.GetRankedBy()
		fmt.Fprintf(w, "Condition %s: %s\n", c.GetName(), VerdictName(d))
		for _, l := range ConditionLines(c, rec.GetTieRule(), true) {
			fmt.Fprintln(w, Wrap(l, 76, "    "))
		}
		h := []string{"  #", "setting", LabelHead(dl), "− recommended" + diffHead(dl)}
		var labels []*pb.FigureLabel
		for _, k := range CandidateFigures {
			l := FigureLabelOf(rec.GetFigures(), k)
			if l == nil || k == dl.GetKey() {
				continue
			}
			labels = append(labels, l)
			h = append(h, LabelHead(l))
		}
		withF := CandidatesHaveF(c.GetCandidates())
		if withF {
			h = append(h, LayoutFigureF.Label)
			anyF = true
		}
		h = append(h, "n", "status")
		ct := NewTable(h...)
		ct.AlignRight(0, 2, 3)
		for i := range len(h) - 5 {
			ct.AlignRight(4 + i)
		}
		for _, cr := range OrderedCandidates(d, c.GetCandidates()) {
			mark := "  "
			if cr.GetCandidate() == d.GetBest() {
				mark = "* "
			}
			status := StatusName(cr.GetStatus())
			if !cr.GetFeasible() {
				status += ", misses constraints"
			}
			row := []string{mark + strconv.Itoa(int(cr.GetCandidate())), PointLabel(cands[cr.GetCandidate()]),
				labelCell(cr.GetObjective(), dl), labelCell(cr.GetDiffToBest(), dl)}
			if cr.GetCandidate() == d.GetBest() {
				row[3] = "–"
			}
			for _, l := range labels {
				row = append(row, labelCell(SearchFigure(cr.GetFigures(), l.GetKey()), l))
			}
			if withF {
				row = append(row, CandidateFCell(cr))
			}
			row = append(row, strconv.Itoa(int(cr.GetObjective().GetN())), status)
			ct.Add(row...)
		}
		ct.Write(w)
		fmt.Fprintln(w)
	}
	fmt.Fprintf(w, "* recommended setting; values with their %g %% intervals [low, high]", 100*conf)
	if pp {
		fmt.Fprint(w, "; pp = percentage points")
	}
	fmt.Fprintln(w)
	if anyF {
		fmt.Fprintln(w, TuneFNote)
	}
	ef := rec.GetEffort()
	runs := Count(int(ef.GetReplications()), "candidate run", "candidate runs")
	if b := int(ef.GetBaselineReplications()); b > 0 { // a layout has no fixed-power baseline
		runs += " + " + Count(b, "fixed-power run", "fixed-power runs")
	}
	fmt.Fprintf(w, "Effort: %s in %s (at most %s of one candidate);\n",
		runs, Count(int(ef.GetStages()), "round", "rounds"), Count(int(ef.GetMaxReplicationsUsed()), "replication", "replications"))
	ratio := ""
	if ef.GetEqualAllocationReplications() > 0 {
		ratio = fmt.Sprintf(" (%.0f %% of it)", 100*float64(ef.GetReplications())/float64(ef.GetEqualAllocationReplications()))
	}
	fmt.Fprintf(w, "        equal allocation to the same precision: %s%s; %s user-slots in %.2f s",
		Count(int(ef.GetEqualAllocationReplications()), "run", "runs"), ratio, GroupDigits(ef.GetUserSlots()), ef.GetWallTimeS())
	if ef.GetBudgetExhausted() {
		fmt.Fprint(w, "; stopped by the budget")
	}
	fmt.Fprintln(w)
}

// Count is "1 condition", "3 conditions": n with the noun in its number.
func Count(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return strconv.Itoa(n) + " " + many
}

// FdtCell is a condition's f_D·T (Doppler frequency × power-control
// period) over its users as the tables show it, 4 decimals: "0.0602", or
// "0.0036–0.0602" when its users' f_D·T differ.
func FdtCell(c *pb.ConditionResult) string {
	lo, hi := Num(c.GetDopplerProductMin(), 4), Num(c.GetDopplerProductMax(), 4)
	if c.GetDopplerProductMin() <= 0 || lo == hi {
		return hi
	}
	return lo + "–" + hi
}

// FdtNote states a condition's f_D·T as measured from its users, with
// their speeds: "f_D·T 0.0036–0.0602 over its users (3 and 50 km/h)" (the
// table's FdtCell). It says what the figures were measured at, no more.
func FdtNote(c *pb.ConditionResult) string {
	var sp []string
	for _, v := range c.GetSpeedsKmh() {
		sp = append(sp, strconv.FormatFloat(v, 'g', 4, 64))
	}
	speeds := ""
	switch len(sp) {
	case 0:
	case 1:
		speeds = " (" + sp[0] + " km/h)"
	default:
		speeds = " (" + strings.Join(sp[:len(sp)-1], ", ") + " and " + sp[len(sp)-1] + " km/h)"
	}
	return "f_D·T " + FdtCell(c) + " over its users" + speeds + "."
}

// ConditionLines are the lines printed under a condition of a tuning
// recommendation, in the CLI and the HTML report alike: with decision,
// its decision's lines (DecisionLines), then the fixed-power comparison
// and the condition's f_D·T (FdtNote). Measured facts only: the engine's
// plain-language reason (which adds why a step did best) is not shown.
func ConditionLines(c *pb.ConditionResult, tieRule string, decision bool) []string {
	var ls []string
	if decision {
		ls = DecisionLines(c.GetDecision(), tieRule)
	}
	if t := c.GetBaseline().GetText(); t != "" {
		ls = append(ls, t)
	}
	return append(ls, FdtNote(c))
}

// NoBaselineNote says why the fixed-power columns are empty ("" when some
// condition has a baseline): the multi-cell engine runs none
// (layout.sites set), or the request skipped it.
func NoBaselineNote(req *pb.TuneRequest, rec *pb.Recommendation) string {
	for _, c := range rec.GetConditions() {
		if c.GetBaseline() != nil {
			return ""
		}
	}
	switch {
	case len(rec.GetConditions()) == 0:
		return ""
	case req.GetBase().GetLayout().GetSites() > 0:
		return "Fixed power –: no fixed-power baseline is run in multi-cell mode (layout.sites set); the candidates are compared with each other only."
	case req.GetSkipBaseline():
		return "Fixed power –: the fixed-power baseline was skipped (--no-baseline)."
	}
	return "Fixed power –: this result carries no fixed-power baseline."
}

// searchFigureHeader is the figure columns of the tune and capacity CSV
// files: each figure's mean, then its interval, suffixed _ci_low and
// _ci_high as in the run and sweep files.
func searchFigureHeader() []string { return csvHeader(searchFigures, "_ci_low", "_ci_high") }

func searchFigureCells(fs *pb.TuneFigures) []string {
	var c []string
	for _, f := range searchFigures {
		if fs == nil {
			c = append(c, "", "", "")
			continue
		}
		e := f.Search(fs)
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
	h = append(h, "status", "feasible", "best", "verdict", "rank", "objective", "objective_ci_low", "objective_ci_high",
		"diff_to_best", "diff_to_best_ci_low", "diff_to_best_ci_high", "n")
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
	// row writes a candidate of a scope; verdict is the scope decision's
	// (VerdictKey, on every row of the scope) and rank the candidate's
	// place in the decision's ordering (1 = recommended).
	row := func(scope, cond string, weight float64, cr *pb.CandidateResult, d *pb.Decision, rank int) {
		r := []string{scope, cond, CSVNum(weight), strconv.Itoa(int(cr.GetCandidate()))}
		r = append(r, coords(cr.GetCandidate())...)
		r = append(r, strings.TrimPrefix(strings.ToLower(cr.GetStatus().String()), "candidate_status_"),
			strconv.FormatBool(cr.GetFeasible()), strconv.FormatBool(cr.GetCandidate() == d.GetBest()),
			VerdictKey(d), strconv.Itoa(rank))
		r = append(r, estCells(cr.GetObjective())...)
		r = append(r, estCells(cr.GetDiffToBest())...)
		r = append(r, strconv.Itoa(int(cr.GetObjective().GetN())))
		cw.Write(append(r, searchFigureCells(cr.GetFigures())...))
	}
	for _, c := range rec.GetConditions() {
		d := c.GetDecision()
		for i, cr := range OrderedCandidates(d, c.GetCandidates()) {
			row("condition", c.GetName(), c.GetWeight(), cr, d, i+1)
		}
		if b := c.GetBaseline(); b != nil {
			r := []string{"baseline", c.GetName(), CSVNum(c.GetWeight()), ""}
			r = append(r, coords(-1)...)
			r = append(r, "", "", "false", "", "", "", "", "", "", "", "", strconv.Itoa(int(b.GetFigures().GetSirErrorStdDb().GetN())))
			cw.Write(append(r, searchFigureCells(b.GetFigures())...))
		}
	}
	for i, cr := range OrderedCandidates(rec.GetOverall(), rec.GetOverallCandidates()) {
		row("overall", "", 1, cr, rec.GetOverall(), i+1)
	}
	cw.Flush()
	return cw.Error()
}
