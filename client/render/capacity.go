package render

import (
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
	"strings"

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
	layout := CapacityIsLayout(req)
	all := CapacityUsers(req, res.GetTotalUsers())
	switch {
	case res.GetHeadline() != "":
		// The API's own verdict line, printed first.
		fmt.Fprintln(w, Wrap(res.GetHeadline(), 78, "  "))
		if !res.GetBelowRange() {
			fmt.Fprintf(w, "Group %d%s: %d in the group, %s\n", g, gname, res.GetCount(), all)
		}
	case res.GetBelowRange():
		fmt.Fprintf(w, "Capacity of group %d%s at outage ≤ %g %%: below the smallest count tried\n", g, gname, limit)
	case res.GetAtRangeTop():
		fmt.Fprintf(w, "Capacity of group %d%s at outage ≤ %g %%: at least %d in the group, %s (the largest count tried passes)\n",
			g, gname, limit, res.GetCount(), all)
	default:
		fmt.Fprintf(w, "Capacity of group %d%s at outage ≤ %g %%: %d in the group, %s\n",
			g, gname, limit, res.GetCount(), all)
	}
	for _, l := range CapacityScope(req, res) {
		fmt.Fprintln(w, Wrap(l, 78, "  "))
	}
	fmt.Fprintln(w, CapacityPoleLines(req, res))
	fmt.Fprintln(w)
	usersHead, load := "users", "feasible"
	if layout {
		// Multi-cell: counts per cell; the engine computes no feasibility.
		usersHead, load = "users per cell", "–"
	}
	h := []string{"count", usersHead, "limits", shortLabel("outage_probability"), shortLabel("noise_rise_mean_db"), "load"}
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
		load := load
		if !layout && !p.GetLoadFeasible() {
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
	if layout {
		fmt.Fprintln(w, "load –: feasibility is not computed in multi-cell mode (only the outage and noise-rise limits are applied)")
	}
	fmt.Fprintf(w, "\n%s\n", Wrap(res.GetReason(), 78, ""))
	if n := res.GetNotice(); n != "" {
		fmt.Fprintln(w, Wrap(n, 78, ""))
	}
	fmt.Fprintf(w, "Effort: %s, %s user-slots in %.2f s\n", Count(int(res.GetReplications()), "replication", "replications"), GroupDigits(res.GetUserSlots()), res.GetWallTimeS())
}

// CapacityCSV writes one row per evaluated count of a capacity search.
// Single cell: count, total_users, pass, outage_ok, noise_rise_ok,
// load_feasible, capacity, n, then the figures, then varied_group (the
// group index), varied_group_name and fixed_users (the other groups' users,
// per cell for a layout, held at their scenario counts). Multi-cell (req's base has
// a layout): the users column holds users per cell and is named
// users_per_cell, layout_users (users per cell × cells) follows it, and
// load_feasible is empty (not computed).
func CapacityCSV(w io.Writer, req *pb.CapacityRequest, res *pb.CapacityResult) error {
	cw := csv.NewWriter(w)
	layout := CapacityIsLayout(req)
	cells := layoutCells(req.GetBase())
	h := []string{"count", "total_users"}
	if layout {
		h = []string{"count", "users_per_cell", "layout_users"}
	}
	// The varied group and the fixed users close every row, after the
	// figures, so the earlier columns keep their places.
	cw.Write(append(append(append(h, "pass", "outage_ok", "noise_rise_ok", "load_feasible", "capacity", "n"), searchFigureHeader()...),
		"varied_group", "varied_group_name", "fixed_users"))
	gname := ""
	if gs := req.GetBase().GetGroups(); int(req.GetGroup()) < len(gs) {
		gname = gs[req.GetGroup()].GetName()
	}
	nFixed, _ := CapacityFixed(req)
	scope := []string{strconv.Itoa(int(req.GetGroup())), gname, strconv.Itoa(nFixed)}
	for _, p := range res.GetEvaluated() {
		r := []string{strconv.Itoa(int(p.GetCount())), strconv.Itoa(int(p.GetTotalUsers()))}
		feasible := strconv.FormatBool(p.GetLoadFeasible())
		if layout {
			r = append(r, strconv.Itoa(int(p.GetTotalUsers())*cells))
			feasible = ""
		}
		r = append(r, strconv.FormatBool(p.GetPass()),
			strconv.FormatBool(p.GetOutageOk()), strconv.FormatBool(p.GetNoiseRiseOk()), feasible,
			strconv.FormatBool(p.GetCount() == res.GetCount() && !res.GetBelowRange()),
			strconv.Itoa(int(p.GetFigures().GetOutageProbability().GetN())))
		cw.Write(append(append(r, searchFigureCells(p.GetFigures())...), scope...))
	}
	cw.Flush()
	return cw.Error()
}

// CapacityGroupLabel is the varied group of a capacity search as
// `group 0 ("pedestrians")` (the name left out when empty or unknown).
func CapacityGroupLabel(req *pb.CapacityRequest) string {
	g := req.GetGroup()
	s := fmt.Sprintf("group %d", g)
	if gs := req.GetBase().GetGroups(); int(g) < len(gs) && gs[g].GetName() != "" {
		s += fmt.Sprintf(" (%q)", gs[g].GetName())
	}
	return s
}

// CapacityFixed is the users of a capacity search's base outside the
// varied group, held at their scenario counts (per cell for a layout):
// their number and a description such as `8 users in group 1 ("cars")`
// or "no other users" when the varied group is the only one.
func CapacityFixed(req *pb.CapacityRequest) (int, string) {
	unit := "users"
	if CapacityIsLayout(req) {
		unit = "users per cell"
	}
	total := 0
	var names, parts []string
	for i, gr := range req.GetBase().GetGroups() {
		if int32(i) == req.GetGroup() {
			continue
		}
		total += int(gr.GetCount())
		n := fmt.Sprintf("group %d", i)
		if gr.GetName() != "" {
			n += fmt.Sprintf(" (%q)", gr.GetName())
		}
		names = append(names, n)
		parts = append(parts, fmt.Sprintf("%d in %s", gr.GetCount(), n))
	}
	switch len(parts) {
	case 0:
		return 0, "no other users"
	case 1:
		return total, fmt.Sprintf("%d %s in %s", total, unit, names[0])
	}
	return total, fmt.Sprintf("%d %s (%s)", total, unit, strings.Join(parts, ", "))
}

// CapacityScope is the lines every capacity output prints about what was
// varied: the varied group (index, name and the scenario's own count of
// it) and the users of the other groups held fixed. When even the
// smallest count tried fails, a second line says so and states what the
// result holds about the scenario's own count of the group: not tried,
// or tried with its outcome (a pass there means the pass/fail outcome was
// not monotone in this group's count). Only measured outcomes are stated.
func CapacityScope(req *pb.CapacityRequest, res *pb.CapacityResult) []string {
	gl := CapacityGroupLabel(req)
	own := int32(-1)
	if gs := req.GetBase().GetGroups(); int(req.GetGroup()) < len(gs) {
		own = gs[req.GetGroup()].GetCount()
	}
	nFixed, fixed := CapacityFixed(req)
	ownText := ""
	if own >= 0 {
		ownText = fmt.Sprintf(", %d in the scenario", own)
	}
	lines := []string{fmt.Sprintf("Varied: the count of %s%s. Held fixed at their scenario counts: %s.", gl, ownText, fixed)}
	if !res.GetBelowRange() || len(res.GetEvaluated()) == 0 {
		return lines
	}
	smallest := res.GetEvaluated()[0]
	for _, p := range res.GetEvaluated() {
		if p.GetCount() < smallest.GetCount() {
			smallest = p
		}
	}
	note := fmt.Sprintf("The smallest count tried already fails: %d in %s, %s.", smallest.GetCount(), gl, CapacityUsers(req, smallest.GetTotalUsers()))
	if own < 0 {
		return append(lines, note)
	}
	var at *pb.CapacityPoint
	for _, p := range res.GetEvaluated() {
		if p.GetCount() == own {
			at = p
		}
	}
	switch {
	case at == nil:
		note += fmt.Sprintf(" The scenario's own count, %d, was not tried: this result says nothing about it (fadeloop run gives its figures).", own)
	case at.GetPass():
		unit := "users"
		if CapacityIsLayout(req) {
			unit = "users per cell"
		}
		note += fmt.Sprintf(" The scenario's own count, %d, passes (outage %s %%): with the other groups (%d %s) held fixed, the outcome is not monotone in this group's count here.",
			own, SearchCell(at.GetFigures(), "outage_probability"), nFixed, unit)
	default:
		note += fmt.Sprintf(" The scenario's own count, %d, fails too.", own)
	}
	return append(lines, note)
}

// CapacityIsLayout reports a capacity search of a multi-cell base
// (layout.sites set): its counts are users per cell.
func CapacityIsLayout(req *pb.CapacityRequest) bool { return req.GetBase().GetLayout().GetSites() != 0 }

// layoutCells is a scenario's number of cells, sites × sectors (sectors 0
// means 1); 1 without a layout.
func layoutCells(sc *pb.Scenario) int {
	l := sc.GetLayout()
	if l.GetSites() == 0 {
		return 1
	}
	return int(l.GetSites()) * int(max(1, l.GetSectorsPerSite()))
}

// CapacityUsers is the users of a capacity count over all groups: "23
// users in all", or in multi-cell mode "23 users per cell (483 in the
// layout's 21 cells)".
func CapacityUsers(req *pb.CapacityRequest, users int32) string {
	if !CapacityIsLayout(req) {
		return fmt.Sprintf("%d users in all", users)
	}
	c := layoutCells(req.GetBase())
	return fmt.Sprintf("%d users per cell (%d in the layout's %d cells)", users, int(users)*c, c)
}

// CapacityPoleLines is the pole estimates with their inputs, one line
// each (joined by newlines). Multi-cell: the pole of one cell with the layout's measured f at
// the capacity count (the server's CapacityResult.pole_params), one sector
// per cell since the other sectors' interference is part of f.
func CapacityPoleLines(req *pb.CapacityRequest, res *pb.CapacityResult) string {
	if res.GetPoleError() != "" {
		return fmt.Sprintf("Pole capacity: not available (%s)", res.GetPoleError())
	}
	pp := res.GetPoleParams()
	gpText := fmt.Sprintf("W/R = %.1f, Eb/I0 = %g dB, activity %g", pp.GetChipRateHz()/pp.GetBitRateBps(), pp.GetEbI0Db(), pp.GetActivityFactor())
	if !CapacityIsLayout(req) {
		return fmt.Sprintf("Pole capacity (Gilhousen et al. 1991): %.1f users  (%s, f = %g, %g sector)\n", res.GetPole(), gpText, pp.GetOtherCellRatio(), pp.GetSectors()) +
			fmt.Sprintf("Pole of the engine's interference equation: %.1f users", res.GetModelPole())
	}
	return fmt.Sprintf("Pole capacity of one cell (Gilhousen et al. 1991): %.1f users per cell  (%s, f = %.2f measured in the layout, 1 sector: a cell is one sector)\n", res.GetPole(), gpText, pp.GetOtherCellRatio()) +
		fmt.Sprintf("Single-receiver pole (G_p+γ)/(γ·ν·(1+f)) with the same f: %.1f users per cell", res.GetModelPole())
}

// confidenceOf is a capacity request's confidence (0.95 when unset, the
// server's default).
func confidenceOf(req *pb.CapacityRequest) float64 {
	if c := req.GetConfidence(); c > 0 {
		return c
	}
	return 0.95
}
