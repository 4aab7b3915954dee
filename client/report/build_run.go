package report

import (
	"fmt"
	"strconv"
	"strings"

	clirender "github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// The page of a run: verdict, figures per aggregate, bin and user, plots.

// detailFigures are the figure columns of the sweep tables (labels, scales
// and decimals: client/render, the one home of figure labels); the per-bin
// and per-user tables have clirender.RunDetailFigures, as the CLI's (the
// noise rise is the cell's: the same in every row).
var detailFigures = append(append([]string(nil), clirender.RunDetailFigures...), "noise_rise_mean_db")

// figureEstimate is the figure key of fs as "v [lo, hi]" in its display
// scale and decimals.
func figureEstimate(key string, fs *pb.Figures) string {
	f := clirender.MustFigure(key)
	return estimate(f.Get(fs), f.Scale, f.Dec)
}

func buildRun(d *doc, rep *pb.RunReport) error {
	agg := rep.GetAggregate()
	f := rep.GetFeasibility()
	sc := rep.GetNormalisedScenario()
	bler := sc.GetOuterLoop().GetBlerTarget()
	if f.GetInfeasible() {
		d.Verdict = verdict{Class: "bad", Headline: "Infeasible load: the users cannot all reach their SIR target."}
		d.Verdict.Lines = append(d.Verdict.Lines, f.GetReason())
		if lf := f.GetLoadFactor(); lf > 0 {
			l := "load factor " + num(lf, 3)
			if sr := f.GetSpectralRadius(); sr > 0 {
				l += ", spectral radius " + num(sr, 3)
			}
			d.Verdict.Lines = append(d.Verdict.Lines, l+" (infeasible at 1 or more)")
		}
	} else {
		out := agg.GetOutageProbability()
		d.Verdict = verdict{Class: "ok", Headline: "Outage " + pctCI(out, 100, 2, "%") + ", SIR error std " + pctCI(agg.GetSirErrorStdDb(), 1, 2, "dB")}
		bl := agg.GetAchievedBler()
		line := "BLER " + pctCI(bl, 100, 2, "%")
		if bler > 0 {
			line += fmt.Sprintf(" against a target of %s %%", num(100*bler, 2))
		}
		ol := sc.GetOuterLoop()
		be := agg.GetBlerTargetError()
		switch {
		case ol != nil && !ol.GetEnabled() && bler > 0:
			line += " (outer loop off: the SIR target is fixed, the BLER target is for reference)"
		case ol.GetEnabled() && be != nil && (be.GetCiLow() > 0 || be.GetCiHigh() < 0):
			d.Verdict.Class = "warn"
			line += fmt.Sprintf("; the outer loop did not hold it: BLER − target %s %% [%s, %s] excludes 0",
				num(100*be.GetValue(), 2), num(100*be.GetCiLow(), 2), num(100*be.GetCiHigh(), 2))
		}
		d.Verdict.Lines = append(d.Verdict.Lines, line+".",
			fmt.Sprintf("Mean Tx power %s dBm, time at max power %s %%, noise rise %s dB.",
				estimate(agg.GetTxPowerMeanDbm(), 1, 2), estimate(agg.GetMaxPowerFraction(), 100, 2), estimate(agg.GetNoiseRiseMeanDb(), 1, 2)))
	}
	if f.GetInfeasible() && rep.GetSimulatedUserSlots() == 0 {
		// Infeasible before the run: nothing simulated, so no figures,
		// tables or plots (they would be all zeros).
		d.Verdict.Lines = append(d.Verdict.Lines, fmt.Sprintf("%d users: not simulated, no figures.", agg.GetUsers()))
		d.Repro = [][2]string{
			{"seed", strconv.FormatUint(rep.GetSeed(), 10)},
			{"engine version", orMissing(rep.GetEngineVersion())},
			{"user-slots simulated", "0"},
		}
		return nil
	}
	d.Verdict.Lines = append(d.Verdict.Lines, fmt.Sprintf("%d users, %s slots × %s after %s warm-up slots.",
		agg.GetUsers(), thousands(rep.GetSlots()), clirender.Count(int(rep.GetReplications()), "replication", "replications"), thousands(sc.GetRun().GetWarmupSlots())))
	for _, n := range rep.GetNotes() {
		if !clirender.IsCautionNote(n) { // the page shows its own caution
			d.Verdict.Lines = append(d.Verdict.Lines, clirender.GroupNumbersIn(n, "\u202f"))
		}
	}

	t := table{Caption: "Aggregate figures over all users, with their 95 % intervals.", Head: []string{"figure", "value", "95 % interval"}, Num: numCols(3, 1)}
	layout := rep.GetLayout() != nil
	for _, fd := range clirender.Figures() {
		e := fd.Get(agg)
		if e == nil || (layout && !clirender.LayoutComputes(fd.Key)) {
			continue // a layout's report has no percentiles or convergence time
		}
		t.add(false, fd.Label, num(fd.Scale*e.GetValue(), fd.Dec), interval(e, fd.Scale, fd.Dec))
	}
	s := section{ID: "figures", Heading: "Figures", Tables: []table{t}}
	if bins := rep.GetDistanceBins(); len(bins) > 0 {
		bt := table{Caption: "Per distance bin (value [95 % interval]).", Head: []string{"distance (m)", "users"}}
		for _, k := range clirender.RunDetailFigures {
			bt.Head = append(bt.Head, clirender.MustFigure(k).Head())
		}
		bt.Num = numCols(len(bt.Head), rangeFrom(1, len(bt.Head))...)
		for _, b := range bins {
			row := []string{num(b.GetMinDistanceM(), 0) + "–" + num(b.GetMaxDistanceM(), 0), strconv.Itoa(int(b.GetFigures().GetUsers()))}
			for _, k := range clirender.RunDetailFigures {
				row = append(row, figureEstimate(k, b.GetFigures()))
			}
			bt.add(false, row...)
		}
		s.Tables = append(s.Tables, bt)
	}
	d.Sections = append(d.Sections, s)
	if ls, ok := layoutSection(rep); ok {
		d.Sections = append(d.Sections, ls)
	}
	figs, err := runFigures(rep)
	if err != nil {
		return err
	}
	if len(figs) > 0 {
		d.Sections = append(d.Sections, section{ID: "plots", Heading: "Plots", Figures: figs})
	}
	if us := rep.GetUsers(); len(us) > 0 {
		ut := table{Caption: "Per user (value [95 % interval]).", Head: []string{"user", "group", "distance (m)", "speed (km/h)", "path loss (dB)"}}
		for _, k := range clirender.RunDetailFigures {
			ut.Head = append(ut.Head, clirender.MustFigure(k).Head())
		}
		ut.Num = numCols(len(ut.Head), append([]int{0}, rangeFrom(2, len(ut.Head))...)...)
		for _, u := range us {
			row := []string{strconv.Itoa(int(u.GetUser())), groupName(sc, u.GetGroup()), num(u.GetDistanceM(), 0), num(u.GetSpeedKmh(), 0), num(u.GetPathLossDb(), 1)}
			for _, k := range clirender.RunDetailFigures {
				row = append(row, figureEstimate(k, u.GetFigures()))
			}
			ut.add(false, row...)
		}
		d.Sections = append(d.Sections, section{ID: "users", Heading: "Per user", Tables: []table{ut}})
	}
	d.Repro = [][2]string{
		{"seed", strconv.FormatUint(rep.GetSeed(), 10)},
		{"engine version", orMissing(rep.GetEngineVersion())},
		{"replications", strconv.Itoa(int(rep.GetReplications()))},
		{"slots per replication", thousands(rep.GetSlots())},
		{"user-slots simulated", thousands(rep.GetSimulatedUserSlots())},
		{"wall time", num(rep.GetWallTimeS(), 2) + " s (" + num(rep.GetUserSlotsPerS()/1e6, 2) + " M user-slots/s)"},
	}
	return nil
}

// layoutSection is the multi-cell part of a run's page: the tables of
// clirender.LayoutParts (the CLI's layout table: same figures, names and
// units), intervals as "[lo, hi]" or "(no interval)".
func layoutSection(rep *pb.RunReport) (section, bool) {
	parts := clirender.LayoutParts(rep, interval)
	if parts == nil {
		return section{}, false
	}
	s := section{ID: "layout", Heading: "Layout", Intro: []string{
		clirender.LayoutHeader(rep) + ".",
		clirender.LayoutFNote + "; its 5th and 95th percentiles over cells and slots are its spread.",
	}}
	for i, p := range parts {
		t := table{Head: p.Head, Num: numCols(len(p.Head), p.Right...)}
		if i == 0 {
			t.Caption = "Layout-wide figures with their 95 % intervals."
		} else {
			t.Caption = strings.ToUpper(p.Title[:1]) + p.Title[1:] + "."
		}
		for _, r := range p.Rows {
			t.add(false, r...)
		}
		s.Tables = append(s.Tables, t)
	}
	return s, true
}
