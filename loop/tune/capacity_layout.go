package tune

import (
	"context"
	"fmt"
	"math"
	"strings"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
)

// The capacity search's multi-cell parts: the measured f of each count and
// the pole it gives, and the caution for a count whose interval does not
// separate it from a limit.

// capacityEval runs one replication and returns its figures and, in
// multi-cell mode, the layout's measured other-cell / own-cell ratio f
// (LayoutOverall.OtherToOwn, linear); f is NaN when there is none.
type capacityEval func(ctx context.Context, sc *loop.Scenario) (Sample, float64, error)

// capacityEvaluator is evaluatorFor(opt) that also reads f from the report
// of a multi-cell replication (opt.RunReplication or the in-process
// engine). An opt.eval (tests) replaces the engine and gives no f.
func capacityEvaluator(opt Options, multiCell bool) capacityEval {
	if !multiCell || opt.eval != nil {
		eval := evaluatorFor(opt)
		return func(ctx context.Context, sc *loop.Scenario) (Sample, float64, error) {
			s, err := eval(ctx, sc)
			return s, math.NaN(), err
		}
	}
	run := opt.RunReplication
	if run == nil {
		run = func(ctx context.Context, sc loop.Scenario) (*loop.Report, error) {
			return multicell.RunScenario(ctx, sc, loop.RunOptions{})
		}
	}
	return func(ctx context.Context, sc *loop.Scenario) (Sample, float64, error) {
		rep, err := run(ctx, *sc)
		if err != nil {
			return Sample{}, math.NaN(), err
		}
		s, err := sampleOf(sc, rep)
		f := math.NaN()
		if rep.Layout != nil {
			f = rep.Layout.Overall.OtherToOwn.Value
		}
		return s, f, err
	}
}

// meanOf is the mean of xs; NaN when xs is empty or any x is NaN.
func meanOf(xs []float64) float64 {
	if len(xs) == 0 {
		return math.NaN()
	}
	var s float64
	for _, x := range xs {
		s += x
	}
	return s / float64(len(xs))
}

// poleCount is the evaluated point whose measured f the multi-cell pole
// uses: the capacity count, or the smallest count evaluated when even that
// fails; nil when nothing was evaluated.
func poleCount(res *CapacityResult) *CapacityPoint {
	for i := range res.Evaluated {
		if p := &res.Evaluated[i]; p.Count == res.Count {
			return p
		}
	}
	if len(res.Evaluated) > 0 {
		return &res.Evaluated[0]
	}
	return nil
}

// setPole fills res's pole capacity (Gilhousen et al., IEEE Trans. Veh.
// Technol. 40(2), 1991, PoleCapacity) and the pole of the single-receiver
// interference equation N* = (G_p+γ)/(γ·ν·(1+f)). Single cell: f =
// receiver.other_cell_ratio, one sector (PoleParamsOf). Multi-cell: the
// pole of one cell — a cell is one sector, the site's other sectors are
// other cells, so their interference is part of f and no further
// sectorisation gain applies — with f the layout's measured other-cell /
// own-cell ratio at poleCount (the mean over its replications).
func setPole(res *CapacityResult, base loop.Scenario) {
	res.PoleParams = PoleParamsOf(base)
	if base.MultiCell() {
		p := poleCount(res)
		if p == nil || math.IsNaN(p.OtherToOwn) {
			res.PoleError = "not computed: the layout's other-cell / own-cell ratio f was not measured"
			return
		}
		res.PoleParams.OtherCellRatio = p.OtherToOwn
		res.PoleParams.Sectors = 1
	}
	pc, err := PoleCapacity(res.PoleParams)
	if err != nil {
		res.PoleError = err.Error()
		return
	}
	res.Pole = pc
	pp := res.PoleParams
	gp, g := pp.ChipRateHz/pp.BitRateBps, math.Pow(10, pp.EbI0DB/10)
	res.ModelPole = (gp + g) / (g * pp.ActivityFactor * (1 + pp.OtherCellRatio))
}

// poleSentence is the reason's sentence on the poles (empty without one).
func poleSentence(res *CapacityResult, base loop.Scenario, unit string) string {
	if res.PoleError != "" {
		if base.MultiCell() {
			return "Pole capacity " + res.PoleError + "."
		}
		return ""
	}
	tail := " The simulated figure adds fading, the loop's own errors, the outage margin and the noise-rise ceiling."
	if !base.MultiCell() {
		return fmt.Sprintf("Pole capacity (Gilhousen et al. 1991): %.1f %s; the pole of this model's own interference equation: %.1f %s.", res.Pole, unit, res.ModelPole, unit) + tail
	}
	at := ""
	if p := poleCount(res); p != nil {
		at = fmt.Sprintf(" at %d %s", p.TotalUsers, unit)
	}
	return fmt.Sprintf("Pole capacity of one cell (Gilhousen et al. 1991) with the layout's measured other-cell / own-cell ratio f = %.2f%s "+
		"(a cell is one sector: the other sectors' interference is part of f): %.1f %s; "+
		"the single-receiver pole (G_p+γ)/(γ·ν·(1+f)) with the same f: %.1f %s.",
		res.PoleParams.OtherCellRatio, at, res.Pole, unit, res.ModelPole, unit) + tail
}

// capacityLimits is the headline's list of limits; in multi-cell mode the
// engine computes no feasibility, so none is claimed.
func capacityLimits(res *CapacityResult, multiCell bool) string {
	nl := FigureLabelOf(FigureNoiseRise)
	s := fmt.Sprintf("outage ≤ %s, noise rise ≤ %s", pct(res.OutageLimit), nl.Value(res.NoiseRiseLimitDB))
	if multiCell {
		return s + "; feasibility not computed in multi-cell mode"
	}
	return s + ", feasible load"
}

// layoutUsers is ", 483 in the layout's 21 cells" for n users per cell of
// a multi-cell base; empty in single-cell mode.
func layoutUsers(n int, base loop.Scenario) string {
	if !base.MultiCell() {
		return ""
	}
	c := base.Layout.Cells()
	return fmt.Sprintf(", %d in the layout's %d cells", n*c, c)
}

// unseparated is the caution for point p (the capacity count): the limits
// whose figure's interval at p contains the limit, so that the pass rests
// on the mean alone; empty when every interval clears its limit or there
// is no interval (one replication). limits are the figures checked
// (res.LimitedBy, or outage and noise rise when nothing failed).
func unseparated(res *CapacityResult, p *CapacityPoint, unit string, conf float64) string {
	if p == nil {
		return ""
	}
	keys := res.LimitedBy
	if len(keys) == 0 {
		keys = []string{FigureOutage, FigureNoiseRise}
	}
	var parts []string
	for _, k := range keys {
		var e ReplicationEstimate
		var limit float64
		switch k {
		case FigureOutage:
			e, limit = p.Figures.OutageProbability, res.OutageLimit
		case FigureNoiseRise:
			e, limit = p.Figures.NoiseRiseDB, res.NoiseRiseLimitDB
		default:
			continue
		}
		if e.N < 2 || math.IsNaN(e.Low) || math.IsNaN(e.High) || e.Excludes(limit) {
			continue
		}
		l := FigureLabelOf(k)
		name := map[string]string{FigureOutage: "outage", FigureNoiseRise: "noise rise"}[k]
		parts = append(parts, fmt.Sprintf("the %s %s %s is not separated from the %s limit", name, l.num(e.Mean), l.Interval(e), l.Value(limit)))
	}
	if len(parts) == 0 {
		return ""
	}
	return fmt.Sprintf("Caution: at %d %s %s (its %s interval contains the limit): the count rests on the mean alone; more replications or slots would settle it.",
		p.TotalUsers, unit, strings.Join(parts, " and "), confText(conf))
}
