package render

import (
	"encoding/csv"
	"fmt"
	"io"
	"strconv"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// CapacityTable writes a capacity search result for people: the capacity
// found, the pole capacity beside it, and every evaluated count.
func CapacityTable(w io.Writer, req *pb.CapacityRequest, res *pb.CapacityResult) {
	if n := req.GetBase().GetName(); n != "" {
		fmt.Fprintln(w, n)
	}
	g := req.GetGroup()
	gname := ""
	if int(g) < len(req.GetBase().GetGroups()) {
		gname = fmt.Sprintf(" (%q)", req.GetBase().GetGroups()[g].GetName())
	}
	limit := 100 * req.GetOutageLimit()
	all := "users in all"
	if req.GetBase().GetLayout().GetSites() != 0 {
		all = "users per cell (isolated-cell pole below)" // multi-cell: counts are per cell
	}
	switch {
	case res.GetHeadline() != "":
		// The API's own verdict line, printed first.
		fmt.Fprintln(w, Wrap(res.GetHeadline(), 78, "  "))
		if !res.GetBelowRange() {
			fmt.Fprintf(w, "Group %d%s: %d in the group, %d users in all\n", g, gname, res.GetCount(), res.GetTotalUsers())
		}
	case res.GetBelowRange():
		fmt.Fprintf(w, "Capacity of group %d%s at outage <= %g %%: below the smallest count tried\n", g, gname, limit)
	case res.GetAtRangeTop():
		fmt.Fprintf(w, "Capacity of group %d%s at outage <= %g %%: at least %d in the group, %d %s (the largest count tried passes)\n",
			g, gname, limit, res.GetCount(), res.GetTotalUsers(), all)
	default:
		fmt.Fprintf(w, "Capacity of group %d%s at outage <= %g %%: %d in the group, %d %s\n",
			g, gname, limit, res.GetCount(), res.GetTotalUsers(), all)
	}
	if res.GetPoleError() == "" {
		pp := res.GetPoleParams()
		fmt.Fprintf(w, "Pole capacity (Gilhousen et al. 1991): %.1f users  (W/R = %.1f, Eb/I0 = %g dB, activity %g, f = %g, %g sector)\n",
			res.GetPole(), pp.GetChipRateHz()/pp.GetBitRateBps(), pp.GetEbI0Db(), pp.GetActivityFactor(), pp.GetOtherCellRatio(), pp.GetSectors())
		fmt.Fprintf(w, "Pole of the engine's interference equation: %.1f users\n", res.GetModelPole())
	} else {
		fmt.Fprintf(w, "Pole capacity: not available (%s)\n", res.GetPoleError())
	}
	fmt.Fprintln(w)
	h := []string{"count", "users", "limits", shortLabel("outage_probability"), shortLabel("noise_rise_mean_db"), "load"}
	for _, k := range CapacityFigures {
		h = append(h, shortLabel(k))
	}
	t := NewTable(append(h, "n")...)
	t.AlignRight(0, 1, 3, 4)
	for i := 6; i <= len(h); i++ {
		t.AlignRight(i)
	}
	for _, p := range res.GetEvaluated() {
		f := p.GetFigures()
		pass := "fail"
		if p.GetPass() {
			pass = "pass"
		}
		if p.GetCount() == res.GetCount() && !res.GetBelowRange() {
			pass += " *"
		}
		// Each limit's own flag beside its figure: "ok" or "over".
		flag := func(ok bool) string {
			if ok {
				return "ok"
			}
			return "over"
		}
		load := "feasible"
		if !p.GetLoadFeasible() {
			load = "infeasible"
		}
		row := []string{strconv.Itoa(int(p.GetCount())), strconv.Itoa(int(p.GetTotalUsers())), pass,
			SearchCell(f, "outage_probability") + " " + flag(p.GetOutageOk()),
			SearchCell(f, "noise_rise_mean_db") + " " + flag(p.GetNoiseRiseOk()), load}
		for _, k := range CapacityFigures {
			row = append(row, SearchCell(f, k))
		}
		t.Add(append(row, strconv.Itoa(int(f.GetOutageProbability().GetN())))...)
	}
	t.Write(w)
	fmt.Fprintf(w, "* the capacity found; values with their %g %% intervals [low, high]\n", 100*confidenceOf(req))
	fmt.Fprintf(w, "\n%s\n", Wrap(res.GetReason(), 78, ""))
	if n := res.GetNotice(); n != "" {
		fmt.Fprintln(w, Wrap(n, 78, ""))
	}
	fmt.Fprintf(w, "Effort: %d replications, %s user-slots in %.2f s\n", res.GetReplications(), GroupDigits(res.GetUserSlots()), res.GetWallTimeS())
}

// CapacityCSV writes one row per evaluated count of a capacity search.
func CapacityCSV(w io.Writer, res *pb.CapacityResult) error {
	cw := csv.NewWriter(w)
	cw.Write(append([]string{"count", "total_users", "pass", "outage_ok", "noise_rise_ok", "load_feasible", "capacity", "n"}, searchFigureHeader()...))
	for _, p := range res.GetEvaluated() {
		r := []string{strconv.Itoa(int(p.GetCount())), strconv.Itoa(int(p.GetTotalUsers())), strconv.FormatBool(p.GetPass()),
			strconv.FormatBool(p.GetOutageOk()), strconv.FormatBool(p.GetNoiseRiseOk()), strconv.FormatBool(p.GetLoadFeasible()),
			strconv.FormatBool(p.GetCount() == res.GetCount() && !res.GetBelowRange()),
			strconv.Itoa(int(p.GetFigures().GetOutageProbability().GetN()))}
		cw.Write(append(r, searchFigureCells(p.GetFigures())...))
	}
	cw.Flush()
	return cw.Error()
}

// confidenceOf is a capacity request's confidence (0.95 when unset, the
// server's default).
func confidenceOf(req *pb.CapacityRequest) float64 {
	if c := req.GetConfidence(); c > 0 {
		return c
	}
	return 0.95
}
