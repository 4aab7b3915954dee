package render

import (
	"fmt"
	"math"
	"slices"
	"sort"

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
