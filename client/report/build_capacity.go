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
		group = clirender.CapacityGroupLabel(req)
		limit = " at outage ≤ " + num(100*req.GetOutageLimit(), 2) + " %"
	}
	// Multi-cell: the counts are per cell (the layout's total beside
	// them) and the pole is one cell's with the layout's measured f.
	layout := clirender.CapacityIsLayout(req)
	users := clirender.CapacityUsers(req, res.GetTotalUsers())
	unit := "users"
	if layout {
		unit = "users per cell"
	}
	switch {
	case res.GetBelowRange():
		d.Verdict = verdict{Class: "bad", Headline: "Even the smallest count searched of " + group + " fails" + limit + "."}
	case res.GetAtRangeTop():
		d.Verdict = verdict{Class: "warn", Headline: fmt.Sprintf("Capacity of %s%s: at least %d (the top of the searched range), %s", group, limit, res.GetCount(), users)}
	default:
		d.Verdict = verdict{Class: "ok", Headline: fmt.Sprintf("Capacity of %s%s: %d in the group, %s", group, limit, res.GetCount(), users)}
	}
	if req != nil {
		// What was varied and what held fixed, in the passing and the
		// failing case alike.
		d.Verdict.Lines = append(d.Verdict.Lines, clirender.CapacityScope(req, res)...)
	}
	if r := res.GetReason(); r != "" {
		d.Verdict.Lines = append(d.Verdict.Lines, r)
		if strings.Contains(r, "not separated from the") && d.Verdict.Class == "ok" {
			d.Verdict.Class = "warn" // the count's interval straddles a limit
		}
	}
	reasonHasPoles := strings.Contains(res.GetReason(), "Gilhousen")
	if pp := res.GetPoleParams(); res.GetPole() > 0 {
		f := fmt.Sprintf("f = %g, %s", pp.GetOtherCellRatio(), clirender.Count(int(pp.GetSectors()), "sector", "sectors"))
		if layout {
			f = "f = " + num(pp.GetOtherCellRatio(), 2) + " measured in the layout at the capacity count, 1 sector per cell (the other sectors' interference is part of f)"
		}
		params := "W/R = " + num(pp.GetChipRateHz()/pp.GetBitRateBps(), 1) + ", Eb/I0 = " + num(pp.GetEbI0Db(), 2) + fmt.Sprintf(" dB, activity %g, ", pp.GetActivityFactor()) + f
		line := fmt.Sprintf("Pole capacity (Gilhousen et al. 1991): %s %s (%s).", num(res.GetPole(), 1), unit, params)
		if reasonHasPoles {
			line = "Pole capacity parameters: " + params + "."
		}
		d.Verdict.Lines = append(d.Verdict.Lines, line)
	} else if e := res.GetPoleError(); e != "" && !reasonHasPoles && !strings.Contains(res.GetReason(), e) {
		d.Verdict.Lines = append(d.Verdict.Lines, "Pole capacity not computed: "+e)
	}
	if mp := res.GetModelPole(); mp > 0 && !reasonHasPoles {
		d.Verdict.Lines = append(d.Verdict.Lines, "Pole of the engine's interference equation: "+num(mp, 1)+" "+unit+".")
	}
	if layout {
		d.Verdict.Lines = append(d.Verdict.Lines, "Feasibility is not computed in multi-cell mode: only the outage and noise-rise limits are applied.")
	}
	if res.GetNonMonotone() {
		d.Verdict.Class = "warn"
		d.Verdict.Lines = append(d.Verdict.Lines, "Outage was not monotone in the count over the evaluated points; check the table.")
	}
	if res.GetBudgetExhausted() {
		d.Verdict.Class = "warn"
		d.Verdict.Lines = append(d.Verdict.Lines, "The user-slot budget ran out before the search finished.")
	}
	t := table{Caption: "Every count evaluated (mean [95 % interval] over replications); the capacity is marked.",
		Head: []string{"count", map[bool]string{false: "users", true: "users per cell"}[layout], clirender.MustFigure("outage_probability").Head(), "pass"}}
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
	reps := "not recorded in this result"
	if r := capacityReplications(req); r != "" {
		reps = r + " (the request's; the scenario's run.replications is not used)"
	}
	d.Repro = [][2]string{
		{"seed", seed},
		{"replications", reps},
		{"engine version", orMissing(engine)},
		{"effort", fmt.Sprintf("%s %s, %s user-slots in %s s", thousands(res.GetReplications()), plural(res.GetReplications(), "replication", "replications"), thousands(res.GetUserSlots()), num(res.GetWallTimeS(), 2))},
	}
	return nil
}

// capacityReplications is the replications a capacity search ran at each
// count, e.g. "2 per count" ("" when the request is not recorded).
func capacityReplications(req *pb.CapacityRequest) string {
	if req == nil {
		return ""
	}
	n := req.GetReplications()
	if n == 0 {
		n = 4 // the server's default
	}
	return fmt.Sprintf("%d per count", n)
}
