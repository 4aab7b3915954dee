package report

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	clirender "github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// The page of a sweep: the lowest-outage point, every grid point, plots.

func sortedPoints(pts []*pb.SweepPoint) []*pb.SweepPoint {
	out := append([]*pb.SweepPoint(nil), pts...)
	sort.SliceStable(out, func(i, j int) bool { return out[i].GetIndex() < out[j].GetIndex() })
	return out
}

func coordText(axes []*pb.SweepAxis, c []float64) string {
	var parts []string
	for i, a := range axes {
		if i < len(c) {
			parts = append(parts, a.GetPath()+" = "+strconv.FormatFloat(c[i], 'g', 6, 64))
		}
	}
	if len(parts) == 0 {
		return "base setting"
	}
	return strings.Join(parts, ", ")
}

func buildSweep(d *doc, s *Sweep, engine string) error {
	pts := sortedPoints(s.Points)
	if len(pts) == 0 {
		return fmt.Errorf("report input: the sweep has no points")
	}
	// Verdict: the lowest outage among feasible points, and whether its
	// interval separates it from the next best.
	var best, second *pb.SweepPoint
	infeasible := 0
	for _, p := range pts {
		if p.GetReport().GetFeasibility().GetInfeasible() {
			infeasible++
			continue
		}
		o := p.GetReport().GetAggregate().GetOutageProbability().GetValue()
		switch {
		case best == nil || o < best.GetReport().GetAggregate().GetOutageProbability().GetValue():
			best, second = p, best
		case second == nil || o < second.GetReport().GetAggregate().GetOutageProbability().GetValue():
			second = p
		}
	}
	if best == nil {
		d.Verdict = verdict{Class: "bad", Headline: "No grid point carries its load: every point is infeasible."}
	} else {
		bo := best.GetReport().GetAggregate().GetOutageProbability()
		d.Verdict = verdict{Class: "ok", Headline: fmt.Sprintf("Lowest outage at %s: %s",
			coordText(s.Axes, best.GetCoordinates()), pctCI(bo, 100, 2, "%"))}
		if second != nil {
			so := second.GetReport().GetAggregate().GetOutageProbability()
			switch {
			case noInterval(bo) || noInterval(so):
				d.Verdict.Class = "warn"
				d.Verdict.Lines = append(d.Verdict.Lines, fmt.Sprintf("Not separated from the next best, %s (%s): no interval for one of them (see the points' notes: more replications or a longer run). For a decision with paired evidence, use tune.",
					coordText(s.Axes, second.GetCoordinates()), pctCI(so, 100, 2, "%")))
			case so.GetCiLow() <= bo.GetCiHigh():
				d.Verdict.Class = "warn"
				d.Verdict.Lines = append(d.Verdict.Lines, fmt.Sprintf("Not separated from the next best, %s (%s %% [%s, %s]): the intervals overlap. For a decision with paired evidence, use tune.",
					coordText(s.Axes, second.GetCoordinates()), num(100*so.GetValue(), 2), num(100*so.GetCiLow(), 2), num(100*so.GetCiHigh(), 2)))
			default:
				d.Verdict.Lines = append(d.Verdict.Lines, fmt.Sprintf("The next best, %s, has %s %% [%s, %s]; the intervals do not overlap.",
					coordText(s.Axes, second.GetCoordinates()), num(100*so.GetValue(), 2), num(100*so.GetCiLow(), 2), num(100*so.GetCiHigh(), 2)))
			}
		}
	}
	if infeasible > 0 {
		d.Verdict.Lines = append(d.Verdict.Lines, fmt.Sprintf("%d of %d %s infeasible (load not carried).", infeasible, len(pts), plural(int32(infeasible), "point is", "points are")))
	}
	t := table{Caption: "Every grid point (value [95 % interval]); the lowest-outage point is marked.", Head: []string{"point"}}
	t.Path = []bool{false}
	for _, a := range s.Axes {
		// The path as typed on one line (th.path): a break inside it read
		// as two words, and a hidden break character copied with it.
		t.Head = append(t.Head, a.GetPath())
		t.Path = append(t.Path, true)
	}
	// A multi-cell sweep's points have no percentiles: their columns are
	// left out.
	cols := detailFigures
	if pts[0].GetReport().GetLayout() != nil {
		cols = nil
		for _, k := range detailFigures {
			if clirender.LayoutComputes(k) {
				cols = append(cols, k)
			}
		}
	}
	for _, k := range cols {
		t.Head = append(t.Head, clirender.MustFigure(k).Head())
	}
	// A layout's own figures, named as in the run's layout table.
	layout := false
	for _, p := range pts {
		layout = layout || p.GetReport().GetLayout() != nil
	}
	if layout {
		for _, f := range clirender.LayoutSweepFigures {
			t.Head = append(t.Head, f.Label)
		}
	}
	t.Head = append(t.Head, "load")
	t.Num = numCols(len(t.Head), rangeFrom(0, len(t.Head)-1)...)
	noLoad := false
	for _, p := range pts {
		row := []string{strconv.FormatInt(p.GetIndex(), 10)}
		for i := range s.Axes {
			v := math.NaN()
			if i < len(p.GetCoordinates()) {
				v = p.GetCoordinates()[i]
			}
			row = append(row, strconv.FormatFloat(v, 'g', 6, 64))
		}
		for _, k := range cols {
			row = append(row, figureEstimate(k, p.GetReport().GetAggregate()))
		}
		if layout {
			for _, f := range clirender.LayoutSweepFigures {
				e := f.Get(p.GetReport().GetLayout().GetOverall())
				if p.GetReport().GetLayout() == nil {
					e = nil
				}
				row = append(row, estimate(e, f.Scale, f.Dec))
			}
		}
		load := "ok"
		switch {
		case p.GetReport().GetLayout() != nil:
			load = "–" // the multi-cell engine computes no feasibility
			noLoad = true
		case p.GetReport().GetFeasibility().GetInfeasible():
			load = "infeasible"
		}
		t.add(p == best, append(row, load)...)
	}
	if layout {
		t.Caption += " " + clirender.LayoutFNote + "."
	}
	if noLoad {
		t.Caption += " Load –: feasibility is not computed in multi-cell mode."
	}
	d.Sections = append(d.Sections, section{ID: "points", Heading: "Grid points", Tables: []table{t}})
	title := pts[0].GetReport().GetNormalisedScenario().GetName()
	if s.Base != nil && s.Base.GetName() != "" {
		title = s.Base.GetName()
	}
	figs, err := sweepFigures(title, s.Axes, pts)
	if err != nil {
		return err
	}
	if len(figs) > 0 {
		d.Sections = append(d.Sections, section{ID: "plots", Heading: "Plots", Figures: figs})
	}
	seeds := map[uint64]bool{}
	var userSlots int64
	for _, p := range pts {
		seeds[p.GetSeed()] = true
		userSlots += p.GetReport().GetSimulatedUserSlots()
	}
	seedText := strconv.FormatUint(pts[0].GetSeed(), 10) + " (every point: common seeds)"
	if len(seeds) > 1 {
		seedText = fmt.Sprintf("per point (%d distinct; see the seed column of --format csv); point %d: %d", len(seeds), pts[0].GetIndex(), pts[0].GetSeed())
	}
	if engine == "" {
		engine = pts[0].GetReport().GetEngineVersion()
	}
	d.Repro = [][2]string{
		{"seed", seedText},
		{"engine version", orMissing(engine)},
		{"axes", axesText(s.Axes)},
		{"points in this result", strconv.Itoa(len(pts))},
		{"user-slots simulated", thousands(userSlots)},
	}
	if sum := s.Summary; sum != nil {
		d.Repro = append(d.Repro, [2]string{"grid points", thousands(sum.GetGridPoints())},
			[2]string{"wall time", num(sum.GetWallTimeS(), 2) + " s (" + num(sum.GetUserSlotsPerS()/1e6, 2) + " M user-slots/s)"})
	}
	return nil
}

func axesText(axes []*pb.SweepAxis) string {
	var parts []string
	for _, a := range axes {
		var vs []string
		for _, v := range a.GetValues() {
			vs = append(vs, strconv.FormatFloat(v, 'g', 6, 64))
		}
		if len(vs) == 0 {
			vs = []string{fmt.Sprintf("%g:%g:%d", a.GetFirst(), a.GetLast(), a.GetCount())}
		}
		parts = append(parts, a.GetPath()+"="+strings.Join(vs, ","))
	}
	if len(parts) == 0 {
		return "none"
	}
	return strings.Join(parts, "; ")
}
