package render

import (
	"encoding/csv"
	"fmt"
	"io"
	"strconv"

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
	fmt.Fprintf(w, "%d users, %s slots × %d replication(s) after %s warm-up slots, seed %d, engine %s\n",
		agg.GetUsers(), GroupDigits(rep.GetSlots()), rep.GetReplications(),
		GroupDigits(sc.GetRun().GetWarmupSlots()), rep.GetSeed(), rep.GetEngineVersion())
	fmt.Fprintf(w, "%s user-slots simulated in %.2f s (%s)\n",
		GroupDigits(rep.GetSimulatedUserSlots()), rep.GetWallTimeS(), FmtRate(rep.GetUserSlotsPerS(), "user-slots/s"))
	if f := rep.GetFeasibility(); f.GetInfeasible() {
		fmt.Fprintf(w, "\nINFEASIBLE LOAD: %s", f.GetReason())
		if f.GetSpectralRadius() > 0 {
			fmt.Fprintf(w, " (spectral radius %.3f)", f.GetSpectralRadius())
		}
		if len(f.GetUsers()) > 0 {
			fmt.Fprintf(w, "; users %v cannot reach the target", f.GetUsers())
		}
		fmt.Fprintln(w)
	}
	fmt.Fprintln(w)
	t := NewTable("figure", "value", "95 % CI").AlignRight(1)
	for _, f := range figures {
		e := f.Get(agg)
		if e == nil || (rep.GetLayout() != nil && layoutOnlyMissing[f.Key]) {
			continue
		}
		t.Add(f.Label, Num(f.Scale*e.GetValue(), f.Dec),
			"["+Num(f.Scale*e.GetCiLow(), f.Dec)+", "+Num(f.Scale*e.GetCiHigh(), f.Dec)+"]")
	}
	t.Write(w)
	LayoutTable(w, rep)

	cols := []string{"sir_error_mean_db", "sir_error_std_db", "outage_probability", "achieved_bler",
		"tx_power_mean_dbm", "tx_power_p95_dbm", "max_power_fraction"}
	if bins := rep.GetDistanceBins(); len(bins) > 0 {
		fmt.Fprintln(w)
		fmt.Fprintln(w, "per distance bin (value ±95 % CI half-width):")
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
		fmt.Fprintln(w, "per user (value ±95 % CI half-width):")
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
}

// RunCSVHeader is the header of `run --format csv`.
func RunCSVHeader() []string {
	return append([]string{"scope", "index", "group", "distance_m", "min_distance_m", "max_distance_m", "users", "user_slots"},
		figureCSVHeader()...)
}

// RunCSV writes a run report as CSV: one row per scope (aggregate, bin,
// user) under RunCSVHeader.
func RunCSV(w io.Writer, rep *pb.RunReport) error {
	cw := csv.NewWriter(w)
	cw.Write(RunCSVHeader())
	agg := rep.GetAggregate()
	cw.Write(append([]string{"aggregate", "", "", "", "", "", strconv.Itoa(int(agg.GetUsers())),
		strconv.FormatInt(agg.GetUserSlots(), 10)}, figureCSVCells(agg)...))
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
