package report

import (
	"fmt"
	"sort"
	"strconv"
	"strings"

	clirender "github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// The page of a capacity search: the count found, poles, every count.

// searchEstimate is the figure key of fs as "mean [low, high]" in its
// display scale and decimals.
func searchEstimate(key string, fs *pb.TuneFigures) string {
	f := clirender.MustFigure(key)
	return repEstimate(clirender.SearchFigure(fs, key), f.Scale, f.Dec)
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
