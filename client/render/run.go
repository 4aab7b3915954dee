package render

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

func groupName(rep *pb.RunReport, g int32) string {
	gs := rep.GetNormalisedScenario().GetGroups()
	if int(g) < len(gs) && gs[g].GetName() != "" {
		return gs[g].GetName()
	}
	return fmt.Sprintf("group %d", g)
}

// RunTable writes a run report for people: aggregate figures with 95 %
// intervals, per distance bin and, with perUser, per user.
func RunTable(w io.Writer, rep *pb.RunReport, perUser bool) {
	sc := rep.GetNormalisedScenario()
	agg := rep.GetAggregate()
	if sc.GetName() != "" {
		fmt.Fprintln(w, sc.GetName())
	}
	if f := rep.GetFeasibility(); notSimulated(rep) {
		// Judged infeasible before the run: nothing was simulated, so
		// there are no figures to show (a table would be all zeros).
		fmt.Fprintf(w, "%d users, seed %d, engine %s: not simulated\n\n", agg.GetUsers(), rep.GetSeed(), rep.GetEngineVersion())
		fmt.Fprintln(w, Wrap(FeasibilityLine(f, agg.GetUsers()), 78, "  "))
		fmt.Fprintln(w, "No figures: nothing was simulated.")
		writeCaution(w)
		return
	}
	fmt.Fprintf(w, "%d users, %s slots × %s after %s warm-up slots, seed %d, engine %s\n",
		agg.GetUsers(), GroupDigits(rep.GetSlots()), Count(int(rep.GetReplications()), "replication", "replications"),
		GroupDigits(sc.GetRun().GetWarmupSlots()), rep.GetSeed(), rep.GetEngineVersion())
	fmt.Fprintf(w, "%s user-slots simulated in %.2f s (%s)\n",
		GroupDigits(rep.GetSimulatedUserSlots()), rep.GetWallTimeS(), FmtRate(rep.GetUserSlotsPerS(), "user-slots/s"))
	if f := rep.GetFeasibility(); f.GetInfeasible() {
		fmt.Fprintf(w, "\n%s\n", Wrap(FeasibilityLine(f, agg.GetUsers()), 78, "  "))
	}
	fmt.Fprintln(w)
	t := NewTable("figure", "value", "95 % interval").AlignRight(1)
	withheld := false
	for _, f := range figures {
		e := f.Get(agg)
		if e == nil || (rep.GetLayout() != nil && layoutOnlyMissing[f.Key]) {
			continue
		}
		t.Add(f.Label, Num(f.Scale*e.GetValue(), f.Dec), Interval(f.Scale*e.GetCiLow(), f.Scale*e.GetCiHigh(), f.Dec))
		withheld = withheld || math.IsNaN(e.GetCiLow()) || math.IsNaN(e.GetCiHigh())
	}
	t.Write(w)
	// The report's notes (why an interval marked "–" is missing and what
	// to change, a warm-up too short for the outer loop, users that never
	// converged, …); the caution about real transmitters comes last, once
	// per output, for a single cell and a layout alike.
	var notes []string
	for _, n := range rep.GetNotes() {
		if !IsCautionNote(n) {
			notes = append(notes, GroupNumbersIn(n, " "))
		}
	}
	if withheld {
		fmt.Fprintln(w, "\nIntervals marked – are not available; the notes say why.")
	}
	if len(notes) > 0 {
		fmt.Fprintln(w, "\nnotes:")
		for _, n := range notes {
			fmt.Fprintln(w, Wrap("- "+n, 78, "  "))
		}
	}
	LayoutTable(w, rep)

	cols := RunDetailFigures
	if bins := rep.GetDistanceBins(); len(bins) > 0 {
		fmt.Fprintln(w)
		fmt.Fprintln(w, "per distance bin (value [95 % interval]):")
		h := []string{"distance (m)", "users"}
		for _, k := range cols {
			h = append(h, shortLabel(k))
		}
		bt := NewTable(h...).AlignRight(1, 2, 3, 4, 5, 6, 7, 8)
		for _, b := range bins {
			row := []string{Num(b.GetMinDistanceM(), 0) + "–" + Num(b.GetMaxDistanceM(), 0), strconv.Itoa(int(b.GetFigures().GetUsers()))}
			for _, k := range cols {
				f, _ := FigureByKey(k)
				row = append(row, cell(f, f.Get(b.GetFigures())))
			}
			bt.Add(row...)
		}
		bt.Write(w)
	}
	if perUser {
		fmt.Fprintln(w)
		fmt.Fprintln(w, "per user (value [95 % interval]):")
		h := []string{"user", "group", "distance (m)", "speed (km/h)", "path loss (dB)"}
		for _, k := range cols {
			h = append(h, shortLabel(k))
		}
		ut := NewTable(h...).AlignRight(0, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11)
		for _, u := range rep.GetUsers() {
			row := []string{strconv.Itoa(int(u.GetUser())), groupName(rep, u.GetGroup()), Num(u.GetDistanceM(), 0),
				Num(u.GetSpeedKmh(), 0), Num(u.GetPathLossDb(), 1)}
			for _, k := range cols {
				f, _ := FigureByKey(k)
				row = append(row, cell(f, f.Get(u.GetFigures())))
			}
			ut.Add(row...)
		}
		ut.Write(w)
	}
	writeCaution(w)
}

// RunCSVHeader is the header of `run --format csv`; layout (a multi-cell
// report) adds the layout's own figures (layoutCSVFigures) at the end.
func RunCSVHeader(layout bool) []string {
	h := append([]string{"scope", "index", "group", "distance_m", "min_distance_m", "max_distance_m", "users", "user_slots"},
		figureCSVHeader()...)
	if layout {
		h = append(h, layoutCSVHeader()...)
	}
	return h
}

// RunCSV writes a run report as CSV: one row per scope (aggregate, bin,
// user) under RunCSVHeader. A figure that was not computed (infeasible
// before the run; in a layout the percentiles and convergence time) has
// empty cells, never 0.
func RunCSV(w io.Writer, rep *pb.RunReport) error {
	cw := csv.NewWriter(w)
	layout := rep.GetLayout() != nil
	cw.Write(RunCSVHeader(layout))
	agg := rep.GetAggregate()
	cells := reportFigureCSVCells(rep)
	if notSimulated(rep) {
		// Infeasible before the run: no figures, empty cells (not zeros).
		for i := range cells {
			cells[i] = ""
		}
	}
	if layout {
		cells = append(cells, layoutCSVCells(rep.GetLayout())...)
	}
	cw.Write(append([]string{"aggregate", "", "", "", "", "", strconv.Itoa(int(agg.GetUsers())),
		strconv.FormatInt(agg.GetUserSlots(), 10)}, cells...))
	for _, b := range rep.GetDistanceBins() {
		f := b.GetFigures()
		cw.Write(append([]string{"bin", strconv.Itoa(int(b.GetBin())), "", "", CSVNum(b.GetMinDistanceM()),
			CSVNum(b.GetMaxDistanceM()), strconv.Itoa(int(f.GetUsers())), strconv.FormatInt(f.GetUserSlots(), 10)},
			figureCSVCells(f)...))
	}
	for _, u := range rep.GetUsers() {
		f := u.GetFigures()
		cw.Write(append([]string{"user", strconv.Itoa(int(u.GetUser())), groupName(rep, u.GetGroup()),
			CSVNum(u.GetDistanceM()), "", "", strconv.Itoa(int(f.GetUsers())), strconv.FormatInt(f.GetUserSlots(), 10)},
			figureCSVCells(f)...))
	}
	cw.Flush()
	return cw.Error()
}

// FeasibilityLine is the feasibility verdict in one line: the server's
// reason, the load factor and spectral radius (infeasible at or above 1)
// and how many of the users cannot reach the SIR target within their
// power limits.
func FeasibilityLine(f *pb.Feasibility, users int32) string {
	s := "INFEASIBLE LOAD: " + strings.TrimSuffix(f.GetReason(), ".")
	var nums []string
	if lf := f.GetLoadFactor(); lf > 0 && !strings.Contains(f.GetReason(), "load factor") {
		nums = append(nums, fmt.Sprintf("load factor %.3f", lf))
	}
	if sr := f.GetSpectralRadius(); sr > 0 && !strings.Contains(f.GetReason(), "spectral radius") {
		nums = append(nums, fmt.Sprintf("spectral radius %.3f", sr))
	}
	if len(nums) > 0 {
		s += " (" + strings.Join(nums, ", ") + "; the bound is 1)"
	}
	if u := f.GetUsers(); len(u) > 0 {
		of := ""
		if users > 0 {
			of = fmt.Sprintf(" of %d", users)
		}
		s += fmt.Sprintf("; %d%s users cannot reach the SIR target: %s", len(u), of, userList(u, 12))
	}
	return s + "."
}

// userList is "3, 7, 12, … (40 more)" with at most n indices.
func userList(u []int32, n int) string {
	var parts []string
	for i, x := range u {
		if i == n {
			parts = append(parts, fmt.Sprintf("… (%d more)", len(u)-n))
			break
		}
		parts = append(parts, strconv.Itoa(int(x)))
	}
	return strings.Join(parts, ", ")
}
