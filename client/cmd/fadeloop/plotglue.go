package main

import (
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"
	"strings"

	"github.com/fadeloop/fadeloop/client/plots"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// plotSpec is one --plot: a kind and a file.
type plotSpec struct {
	kind string
	file string
}

// plotList is the repeatable --plot [KIND=]FILE flag.
type plotList []plotSpec

func (p *plotList) String() string {
	var s []string
	for _, x := range *p {
		s = append(s, x.kind+"="+x.file)
	}
	return strings.Join(s, ",")
}

func (p *plotList) Set(v string) error {
	kind, file, ok := strings.Cut(v, "=")
	if !ok {
		kind, file = "", v
	}
	if _, err := plots.FormatOf(file); err != nil {
		return err
	}
	*p = append(*p, plotSpec{kind: kind, file: file})
	return nil
}

// check fills the default kind and rejects kinds the command cannot draw.
func (p plotList) check(def string, allowed ...string) error {
	for i := range p {
		if p[i].kind == "" {
			p[i].kind = def
		}
		if !slices.Contains(allowed, p[i].kind) {
			return badInputf("--plot %s=%s: unknown plot kind %q for this command (kinds: %s)",
				p[i].kind, p[i].file, p[i].kind, strings.Join(allowed, ", "))
		}
	}
	return nil
}

func (p plotList) needs(kinds ...string) bool {
	for _, x := range p {
		if slices.Contains(kinds, x.kind) {
			return true
		}
	}
	return false
}

func (p plotList) onlyTraces() bool {
	for _, x := range p {
		if x.kind != "traces" {
			return false
		}
	}
	return true
}

// plotRun draws one plot of a run report.
func plotRun(ps plotSpec, rep *pb.RunReport, users []int32) error {
	title := rep.GetNormalisedScenario().GetName()
	if title == "" {
		title = "fadeloop run"
	}
	var (
		fig *plots.Figure
		err error
	)
	switch ps.kind {
	case "traces":
		fig, err = plots.Traces("Traces — "+title, runTraces(rep, users))
	case "cdf":
		fig, err = plots.SIRErrorCDF("SIR error distribution per distance bin — "+title, runBinErrors(rep))
	case "map", "map-power":
		fig, err = layoutMap(title, ps.kind, rep)
	case "distance":
		minP, maxP := math.NaN(), math.NaN()
		if il := rep.GetNormalisedScenario().GetInnerLoop(); il != nil {
			minP, maxP = il.GetMinPowerDbm(), il.GetMaxPowerDbm()
		}
		fig, err = plots.PowerVsDistance("Tx power against distance — "+title, runDistancePoints(rep), minP, maxP, "5th–95th percentile")
	default:
		return fmt.Errorf("unknown plot kind %q", ps.kind)
	}
	if err != nil {
		return err
	}
	return fig.Save(ps.file)
}

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

func runTraces(rep *pb.RunReport, users []int32) []plots.Trace {
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
			label = fmt.Sprintf("user %d (%s, %s m, %s km/h)", u, groupName(rep, ui.GetGroup()), num(ui.GetDistanceM(), 0), num(ui.GetSpeedKmh(), 0))
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

// runBinErrors gives the SIR error distribution of each distance bin: the
// empirical distribution of the traced samples (after warm-up) when traces
// are present, else the bin's reported percentiles.
func runBinErrors(rep *pb.RunReport) []plots.ErrorDistribution {
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
		d := plots.ErrorDistribution{Label: fmt.Sprintf("%s–%s m (%d %s)", num(b.GetMinDistanceM(), 0), num(b.GetMaxDistanceM(), 0), b.GetFigures().GetUsers(), users)}
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
			d.Quantiles = quantiles(b.GetFigures().GetSirErrorPercentilesDb())
		}
		out = append(out, d)
	}
	if len(out) == 0 {
		out = append(out, plots.ErrorDistribution{Label: "all users", Quantiles: quantiles(rep.GetAggregate().GetSirErrorPercentilesDb())})
	}
	return out
}

func quantiles(p *pb.Percentiles) []plots.Quantile {
	if p == nil {
		return nil
	}
	return []plots.Quantile{
		{P: 0.01, ValueDB: p.GetP1().GetValue()}, {P: 0.05, ValueDB: p.GetP5().GetValue()},
		{P: 0.5, ValueDB: p.GetP50().GetValue()}, {P: 0.95, ValueDB: p.GetP95().GetValue()},
		{P: 0.99, ValueDB: p.GetP99().GetValue()},
	}
}

func runDistancePoints(rep *pb.RunReport) []plots.DistancePoint {
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

// sweepObjective is the quantity a sweep heat map shows.
type sweepObjective struct {
	key   string
	label string
	scale float64
	lower bool
}

var sweepObjectives = map[string]sweepObjective{
	"std":    {"sir_error_std_db", "SIR error std (dB)", 1, true},
	"outage": {"outage_probability", "outage (%)", 100, true},
	"power":  {"tx_power_mean_dbm", "mean Tx power (dBm)", 1, true},
	"bler":   {"bler_target_error", "|BLER − target| (%)", 100, true},
}

const (
	stepPath = "inner_loop.step_db"
	ratePath = "inner_loop.update_rate_hz"
)

// autoSweepPlot picks the plot kind from the axes: a heat map for step ×
// update rate, step curves for step × one other axis, CDFs otherwise.
func autoSweepPlot(axes []*pb.SweepAxis) string {
	paths := map[string]bool{}
	for _, a := range axes {
		paths[a.GetPath()] = true
	}
	switch {
	case len(axes) == 2 && paths[stepPath] && paths[ratePath]:
		return "heatmap"
	case paths[stepPath] && len(axes) <= 2:
		return "steps"
	}
	return "cdf"
}

func axisLabel(a *pb.SweepAxis, v float64) string {
	p := a.GetPath()
	short := p[strings.LastIndexByte(p, '.')+1:]
	unit := ""
	for _, u := range []struct{ suf, unit string }{{"_db", "dB"}, {"_hz", "Hz"}, {"_kmh", "km/h"}, {"_slots", "slots"}, {"_dbm", "dBm"}, {"_m", "m"}, {"_s", "s"}} {
		if strings.HasSuffix(short, u.suf) {
			short, unit = strings.TrimSuffix(short, u.suf), " "+u.unit
			break
		}
	}
	short = strings.ReplaceAll(short, "_", " ")
	if short == "speed" {
		return strconv.FormatFloat(v, 'g', 4, 64) + unit
	}
	return short + " " + strconv.FormatFloat(v, 'g', 4, 64) + unit
}

// checkSweepPlot rejects, before any work, a plot the axes cannot give.
func checkSweepPlot(ps plotSpec, axes []*pb.SweepAxis) error {
	kind := ps.kind
	if kind == "auto" {
		kind = autoSweepPlot(axes)
	}
	paths := map[string]int{}
	for _, a := range axes {
		paths[a.GetPath()]++
	}
	switch kind {
	case "layout":
		if len(axes) < 1 || len(axes) > 2 {
			return badInputf("--plot layout=%s needs one or two axes (x, then one line per value of the second)", ps.file)
		}
	case "steps":
		if paths[stepPath] != 1 || len(axes) > 2 {
			return badInputf("--plot steps=%s needs the axis %s and at most one other axis (one line per value)", ps.file, stepPath)
		}
	case "heatmap":
		if paths[stepPath] != 1 || paths[ratePath] != 1 || len(axes) != 2 {
			return badInputf("--plot heatmap=%s needs exactly the axes %s and %s", ps.file, stepPath, ratePath)
		}
	}
	return nil
}

// plotSweep draws one plot of a finished sweep (points sorted by index).
func plotSweep(ps plotSpec, title string, axes []*pb.SweepAxis, pts []*pb.SweepPoint, objective string) error {
	kind := ps.kind
	if kind == "auto" {
		kind = autoSweepPlot(axes)
	}
	var (
		fig *plots.Figure
		err error
	)
	switch kind {
	case "layout":
		fig, err = layoutSweepFigure(title, axes, pts)
	case "cdf":
		var ds []plots.ErrorDistribution
		for _, p := range pts {
			var parts []string
			for i, a := range axes {
				if i < len(p.GetCoordinates()) {
					parts = append(parts, axisLabel(a, p.GetCoordinates()[i]))
				}
			}
			ds = append(ds, plots.ErrorDistribution{Label: strings.Join(parts, ", "),
				Quantiles: quantiles(p.GetReport().GetAggregate().GetSirErrorPercentilesDb())})
		}
		if len(ds) > 8 {
			return badInputf("a cdf plot shows at most 8 candidates; this sweep has %d points (use --points or fewer values)", len(ds))
		}
		fig, err = plots.SIRErrorCDF("SIR error distribution per candidate — "+title, ds)
	case "steps":
		si, oi := -1, -1
		for i, a := range axes {
			if a.GetPath() == stepPath {
				si = i
			} else {
				oi = i
			}
		}
		if si < 0 || len(axes) > 2 {
			return badInputf("a steps plot needs the axis %s and at most one other axis (one line per value)", stepPath)
		}
		lines := map[float64]*plots.StepLine{}
		var order []float64
		for _, p := range pts {
			c := p.GetCoordinates()
			key := 0.0
			label := "all"
			if oi >= 0 {
				key = c[oi]
				label = axisLabel(axes[oi], key)
			}
			l := lines[key]
			if l == nil {
				l = &plots.StepLine{Label: label}
				lines[key] = l
				order = append(order, key)
			}
			f := p.GetReport().GetAggregate()
			o, s := f.GetOutageProbability(), f.GetSirErrorStdDb()
			l.StepDB = append(l.StepDB, c[si])
			l.OutagePct = append(l.OutagePct, 100*o.GetValue())
			l.OutageLowPct = append(l.OutageLowPct, 100*o.GetCiLow())
			l.OutageHighPct = append(l.OutageHighPct, 100*o.GetCiHigh())
			l.ErrorStdDB = append(l.ErrorStdDB, s.GetValue())
			l.ErrorStdLowDB = append(l.ErrorStdLowDB, s.GetCiLow())
			l.ErrorStdHighDB = append(l.ErrorStdHighDB, s.GetCiHigh())
		}
		sort.Float64s(order)
		var ls []plots.StepLine
		for _, k := range order {
			l := lines[k]
			sortStepLine(l)
			ls = append(ls, *l)
		}
		fig, err = plots.StepSensitivity("Outage and SIR error spread against step size — "+title, ls)
	case "heatmap":
		obj, ok := sweepObjectives[objective]
		if !ok {
			return badInputf("--objective %q: must be one of std, outage, power, bler", objective)
		}
		si, ri := -1, -1
		for i, a := range axes {
			switch a.GetPath() {
			case stepPath:
				si = i
			case ratePath:
				ri = i
			}
		}
		if si < 0 || ri < 0 || len(axes) != 2 {
			return badInputf("a heatmap plot needs exactly the axes %s and %s", stepPath, ratePath)
		}
		g := plots.ObjectiveGrid{Objective: obj.label, StepDB: sortedValues(axes[si]), UpdateRateHz: sortedValues(axes[ri]), LowerIsBetter: obj.lower}
		g.Value = make([][]float64, len(g.UpdateRateHz))
		for r := range g.Value {
			g.Value[r] = make([]float64, len(g.StepDB))
			for c := range g.Value[r] {
				g.Value[r][c] = math.NaN()
			}
		}
		f, _ := figureByKey(obj.key)
		for _, p := range pts {
			c := p.GetCoordinates()
			col := slices.Index(g.StepDB, c[si])
			row := slices.Index(g.UpdateRateHz, c[ri])
			if col < 0 || row < 0 {
				continue
			}
			v := obj.scale * f.get(p.GetReport().GetAggregate()).GetValue()
			if objective == "bler" {
				v = math.Abs(v)
			}
			g.Value[row][col] = v
		}
		fig, err = plots.HeatMap(obj.label+" over step × update rate — "+title, g)
	default:
		return badInputf("unknown plot kind %q", kind)
	}
	if err != nil {
		return err
	}
	return fig.Save(ps.file)
}

func sortedValues(a *pb.SweepAxis) []float64 {
	v := slices.Clone(a.GetValues())
	slices.Sort(v)
	return slices.Compact(v)
}

func sortStepLine(l *plots.StepLine) {
	idx := make([]int, len(l.StepDB))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return l.StepDB[idx[a]] < l.StepDB[idx[b]] })
	perm := func(v []float64) []float64 {
		out := make([]float64, len(v))
		for i, j := range idx {
			out[i] = v[j]
		}
		return out
	}
	l.StepDB, l.OutagePct, l.OutageLowPct, l.OutageHighPct = perm(l.StepDB), perm(l.OutagePct), perm(l.OutageLowPct), perm(l.OutageHighPct)
	l.ErrorStdDB, l.ErrorStdLowDB, l.ErrorStdHighDB = perm(l.ErrorStdDB), perm(l.ErrorStdLowDB), perm(l.ErrorStdHighDB)
}
