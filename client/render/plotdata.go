package render

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"
	"strings"

	"github.com/fadeloop/fadeloop/client/plots"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// traceUsersDefault picks the nearest, the median and the farthest user.
func traceUsersDefault(rep *pb.RunReport) []int32 {
	us := slices.Clone(rep.GetUsers())
	if len(us) == 0 {
		return nil
	}
	sort.SliceStable(us, func(i, j int) bool { return us[i].GetDistanceM() < us[j].GetDistanceM() })
	pick := []int32{us[0].GetUser(), us[len(us)/2].GetUser(), us[len(us)-1].GetUser()}
	return slices.Compact(pick)
}

// RunTraces turns the report's per-user traces into plot lines for the given
// users (when empty: the nearest, the median and the farthest traced user).
func RunTraces(rep *pb.RunReport, users []int32) []plots.Trace {
	if len(users) == 0 {
		users = traceUsersDefault(rep)
	}
	rate := rep.GetNormalisedScenario().GetInnerLoop().GetUpdateRateHz()
	if !(rate > 0) {
		rate = 1
	}
	byUser := map[int32]*pb.UserTrace{}
	for _, t := range rep.GetTraces() {
		byUser[t.GetUser()] = t
	}
	info := map[int32]*pb.UserFigures{}
	for _, u := range rep.GetUsers() {
		info[u.GetUser()] = u
	}
	var out []plots.Trace
	for _, u := range users {
		t := byUser[u]
		if t == nil {
			continue
		}
		label := fmt.Sprintf("user %d", u)
		if ui := info[u]; ui != nil {
			label = fmt.Sprintf("user %d (%s, %s m, %s km/h)", u, groupName(rep, ui.GetGroup()), Num(ui.GetDistanceM(), 0), Num(ui.GetSpeedKmh(), 0))
		}
		tr := plots.Trace{Label: label}
		for i, s := range t.GetSlots() {
			tr.TimeS = append(tr.TimeS, float64(s)/rate)
			tr.SIRDB = append(tr.SIRDB, at32(t.GetSirDb(), i))
			tr.TargetDB = append(tr.TargetDB, at32(t.GetTargetDb(), i))
			tr.TxPowerDBM = append(tr.TxPowerDBM, at32(t.GetTxPowerDbm(), i))
		}
		out = append(out, tr)
	}
	return out
}

func at32(v []float32, i int) float64 {
	if i < len(v) {
		return float64(v[i])
	}
	return math.NaN()
}

// RunBinErrors gives the SIR error distribution of each distance bin: the
// empirical distribution of the traced samples (after warm-up) when traces
// are present, else the bin's reported percentiles.
func RunBinErrors(rep *pb.RunReport) []plots.ErrorDistribution {
	bins := rep.GetDistanceBins()
	warm := rep.GetNormalisedScenario().GetRun().GetWarmupSlots()
	dist := map[int32]float64{}
	for _, u := range rep.GetUsers() {
		dist[u.GetUser()] = u.GetDistanceM()
	}
	var out []plots.ErrorDistribution
	for i, b := range bins {
		users := "users"
		if b.GetFigures().GetUsers() == 1 {
			users = "user"
		}
		d := plots.ErrorDistribution{Label: fmt.Sprintf("%s–%s m (%d %s)", Num(b.GetMinDistanceM(), 0), Num(b.GetMaxDistanceM(), 0), b.GetFigures().GetUsers(), users)}
		for _, t := range rep.GetTraces() {
			x := dist[t.GetUser()]
			in := x >= b.GetMinDistanceM() && (x < b.GetMaxDistanceM() || (i == len(bins)-1 && x <= b.GetMaxDistanceM()))
			if !in {
				continue
			}
			for k, s := range t.GetSlots() {
				if s < warm || k >= len(t.GetSirDb()) || k >= len(t.GetTargetDb()) {
					continue
				}
				d.SamplesDB = append(d.SamplesDB, float64(t.GetSirDb()[k]-t.GetTargetDb()[k]))
			}
		}
		if len(d.SamplesDB) == 0 {
			d.Quantiles = Quantiles(b.GetFigures().GetSirErrorPercentilesDb())
		}
		out = append(out, d)
	}
	if len(out) == 0 {
		out = append(out, plots.ErrorDistribution{Label: "all users", Quantiles: Quantiles(rep.GetAggregate().GetSirErrorPercentilesDb())})
	}
	return out
}

// Quantiles lists the percentiles of p as plot quantiles.
func Quantiles(p *pb.Percentiles) []plots.Quantile {
	if p == nil {
		return nil
	}
	return []plots.Quantile{
		{P: 0.01, ValueDB: p.GetP1().GetValue()}, {P: 0.05, ValueDB: p.GetP5().GetValue()},
		{P: 0.5, ValueDB: p.GetP50().GetValue()}, {P: 0.95, ValueDB: p.GetP95().GetValue()},
		{P: 0.99, ValueDB: p.GetP99().GetValue()},
	}
}

// RunDistancePoints lists mean transmit power with its 5th–95th percentile
// range against distance, one point per user.
func RunDistancePoints(rep *pb.RunReport) []plots.DistancePoint {
	var pts []plots.DistancePoint
	for _, u := range rep.GetUsers() {
		f := u.GetFigures()
		p := plots.DistancePoint{Group: groupName(rep, u.GetGroup()), DistanceM: u.GetDistanceM(),
			TxMeanDBM: f.GetTxPowerMeanDbm().GetValue()}
		if pc := f.GetTxPowerPercentilesDbm(); pc != nil {
			p.TxLowDBM, p.TxHighDBM, p.HasPercent = pc.GetP5().GetValue(), pc.GetP95().GetValue(), true
		}
		pts = append(pts, p)
	}
	return pts
}

// Axis paths of the tuning plots.
const (
	StepPath = "inner_loop.step_db"
	RatePath = "inner_loop.update_rate_hz"
)

// candidateCoord is candidate k's value on the axis path (NaN when absent).
func candidateCoord(cands []*pb.GridPoint, k int32, path string) float64 {
	if k < 0 || int(k) >= len(cands) {
		return math.NaN()
	}
	for _, c := range cands[k].GetCoords() {
		if c.GetPath() == path {
			return c.GetValue()
		}
	}
	return math.NaN()
}

// TuneObjectiveGrid is the overall ranked figure of every candidate over
// step × update rate (ok only when the candidates have exactly those two
// axes), in the units of the overall decision's ranked_by label, with the
// recommended candidate (overall.best) outlined. The one conversion of a
// Recommendation to a heat map, for the CLI's --plot and the HTML report.
func TuneObjectiveGrid(rec *pb.Recommendation) (plots.ObjectiveGrid, bool) {
	cands := rec.GetCandidates()
	if len(cands) == 0 || len(cands[0].GetCoords()) != 2 {
		return plots.ObjectiveGrid{}, false
	}
	var steps, rates []float64
	for i := range cands {
		steps = append(steps, candidateCoord(cands, int32(i), StepPath))
		rates = append(rates, candidateCoord(cands, int32(i), RatePath))
	}
	for i := range steps {
		if math.IsNaN(steps[i]) || math.IsNaN(rates[i]) {
			return plots.ObjectiveGrid{}, false
		}
	}
	slices.Sort(steps)
	slices.Sort(rates)
	ov := rec.GetOverall()
	l := ov.GetRankedBy()
	sc, _ := labelScale(l)
	g := plots.ObjectiveGrid{Objective: LabelHead(l), StepDB: slices.Compact(steps),
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
		col := slices.Index(g.StepDB, candidateCoord(cands, cr.GetCandidate(), StepPath))
		row := slices.Index(g.UpdateRateHz, candidateCoord(cands, cr.GetCandidate(), RatePath))
		if col >= 0 && row >= 0 {
			g.Value[row][col] = sc * cr.GetObjective().GetMean()
		}
	}
	col := slices.Index(g.StepDB, candidateCoord(cands, ov.GetBest(), StepPath))
	row := slices.Index(g.UpdateRateHz, candidateCoord(cands, ov.GetBest(), RatePath))
	if col >= 0 && row >= 0 {
		g.Marked, g.MarkRow, g.MarkCol = true, row, col
		g.MarkLabel = "recommended (" + VerdictName(ov) + ")"
	}
	return g, true
}

// TuneStepLines is outage (%) and SIR error std (dB) with their intervals
// against the step size, one line per condition, each condition's
// recommended candidate marked (ok only when the step size is the only
// axis): TuneAxisLines for inner_loop.step_db.
func TuneStepLines(rec *pb.Recommendation) ([]plots.StepLine, bool) {
	ls, path, ok := TuneAxisLines(rec)
	if !ok || path != StepPath {
		return nil, false
	}
	return ls, true
}

// TuneAxisLines is outage (%) and SIR error std (dB) with their intervals
// against the one axis of a recommendation (any numeric path, e.g.
// layout.handover.window_db; its values in StepLine.StepDB), one line per
// condition, each condition's recommended candidate marked; path is the
// axis. ok is false unless there is exactly one axis. The one conversion
// of a Recommendation to a line plot against its axis.
func TuneAxisLines(rec *pb.Recommendation) (ls []plots.StepLine, path string, ok bool) {
	cands := rec.GetCandidates()
	if len(cands) == 0 || len(cands[0].GetCoords()) != 1 {
		return nil, "", false
	}
	path = cands[0].GetCoords()[0].GetPath()
	for _, c := range rec.GetConditions() {
		l := plots.StepLine{Label: c.GetName() + " (" + VerdictName(c.GetDecision()) + ")"}
		crs := slices.Clone(c.GetCandidates())
		slices.SortStableFunc(crs, func(a, b *pb.CandidateResult) int {
			return cmp.Compare(candidateCoord(cands, a.GetCandidate(), path), candidateCoord(cands, b.GetCandidate(), path))
		})
		for _, cr := range crs {
			f := cr.GetFigures()
			o, s := f.GetOutageProbability(), f.GetSirErrorStdDb()
			l.Add(candidateCoord(cands, cr.GetCandidate(), path), o.GetMean(), o.GetLow(), o.GetHigh(), s.GetMean(), s.GetLow(), s.GetHigh())
			l.Recommended = append(l.Recommended, cr.GetCandidate() == c.GetDecision().GetBest())
		}
		ls = append(ls, l)
	}
	return ls, path, true
}

// AxisValueLabel is the plot label of value v of the axis at field path p,
// e.g. "step 0.5 dB" for inner_loop.step_db: the last path element without
// its unit suffix, then the value and the unit. A per-group field keeps its
// group (and speeds entry) so the label does not read as every user's
// value: "groups[1].speeds[0] 30 km/h", "groups[0] distance 300 m".
func AxisValueLabel(p string, v float64) string {
	i := strings.LastIndexByte(p, '.')
	prefix, short := "", p[i+1:]
	if strings.HasPrefix(p, "groups[") && i >= 0 {
		prefix = p[:i] + " "
	}
	unit := ""
	for _, u := range []struct{ suf, unit string }{{"_db", "dB"}, {"_hz", "Hz"}, {"_kmh", "km/h"}, {"_slots", "slots"}, {"_dbm", "dBm"}, {"_m", "m"}, {"_s", "s"}} {
		if strings.HasSuffix(short, u.suf) {
			short, unit = strings.TrimSuffix(short, u.suf), " "+u.unit
			break
		}
	}
	short = strings.ReplaceAll(short, "_", " ")
	if short == "speed" {
		return prefix + strconv.FormatFloat(v, 'g', 4, 64) + unit
	}
	return prefix + short + " " + strconv.FormatFloat(v, 'g', 4, 64) + unit
}
