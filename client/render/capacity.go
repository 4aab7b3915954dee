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
	t := NewTable("count", "users", "outage (%)", "pass", "SIR err std (dB)", "BLER (%)", "Tx mean (dBm)", "at max (%)", "noise rise (dB)", "n")
	t.AlignRight(0, 1, 2, 4, 5, 6, 7, 8, 9)
	for _, p := range res.GetEvaluated() {
		f := p.GetFigures()
		pass := "fail"
		if p.GetPass() {
			pass = "pass"
		}
		if p.GetCount() == res.GetCount() {
			pass += " *"
		}
		t.Add(strconv.Itoa(int(p.GetCount())), strconv.Itoa(int(p.GetTotalUsers())), estCell(f.GetOutageProbability(), 100, 3),
			pass, estCell(f.GetSirErrorStdDb(), 1, 3), estCell(f.GetAchievedBler(), 100, 2), estCell(f.GetTxPowerMeanDbm(), 1, 2),
			estCell(f.GetMaxPowerFraction(), 100, 2), estCell(f.GetNoiseRiseMeanDb(), 1, 2), strconv.Itoa(int(f.GetOutageProbability().GetN())))
	}
	t.Write(w)
	fmt.Fprintf(w, "\n%s\n", Wrap(res.GetReason(), 78, ""))
	fmt.Fprintf(w, "Effort: %d replications, %s user-slots in %.2f s\n", res.GetReplications(), GroupDigits(res.GetUserSlots()), res.GetWallTimeS())
}

// CapacityCSV writes one row per evaluated count of a capacity search.
func CapacityCSV(w io.Writer, res *pb.CapacityResult) error {
	cw := csv.NewWriter(w)
	cw.Write(append([]string{"count", "total_users", "pass", "n"}, searchFigureHeader()...))
	for _, p := range res.GetEvaluated() {
		r := []string{strconv.Itoa(int(p.GetCount())), strconv.Itoa(int(p.GetTotalUsers())), strconv.FormatBool(p.GetPass()),
			strconv.Itoa(int(p.GetFigures().GetOutageProbability().GetN()))}
		cw.Write(append(r, searchFigureCells(p.GetFigures())...))
	}
	cw.Flush()
	return cw.Error()
}
