package tune

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/bits"
	"sort"
	"strings"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
)

// PoleParams are the inputs of the pole-capacity estimate of a CDMA cell.
type PoleParams struct {
	// ChipRateHz W, the spread bandwidth in chip/s, > 0.
	ChipRateHz float64 `json:"chip_rate_hz"`
	// BitRateBps R, the user bit rate in bit/s, (0, W].
	BitRateBps float64 `json:"bit_rate_bps"`
	// EbI0DB is the required Eb/I0 (the SIR target after despreading) in dB,
	// [−30, 50].
	EbI0DB float64 `json:"eb_i0_db"`
	// ActivityFactor ν, the voice activity, (0, 1].
	ActivityFactor float64 `json:"activity_factor"`
	// OtherCellRatio f: other-cell interference as a fraction of own-cell
	// interference, [0, 10]; the frequency reuse efficiency is F = 1/(1+f).
	OtherCellRatio float64 `json:"other_cell_ratio"`
	// Sectors is the sectorisation gain (number of sectors), [1, 12].
	Sectors float64 `json:"sectors"`
}

// PoleCapacity is the pole capacity of a CDMA cell (the user count at which
// the interference, and so the power, would grow without bound):
//
//	N ≈ (W/R) / (Eb/I0) · (1/ν) · F · sectors,  F = 1/(1+f)
//
// (Gilhousen et al., IEEE Trans. Veh. Technol. 40(2), 1991). With W = 1.2288
// Mchip/s, R = 9.6 kbit/s, Eb/I0 = 6 dB, ν = 1/2, F = 1/1.66 and 3 sectors it
// gives about 116 users. It returns an error naming the parameter out of
// range.
func PoleCapacity(p PoleParams) (float64, error) {
	var v loop.Violations
	chk := func(name string, x, lo, hi float64, loOpen bool) {
		if math.IsNaN(x) || x > hi || x < lo || (loOpen && x == lo) {
			br := "["
			if loOpen {
				br = "("
			}
			v = append(v, loop.Violation{Field: name, Rule: fmt.Sprintf("must be in %s%g, %g], got %g", br, lo, hi, x)})
		}
	}
	chk("chip_rate_hz", p.ChipRateHz, 0, 1e10, true)
	chk("bit_rate_bps", p.BitRateBps, 0, math.Max(p.ChipRateHz, 0), true)
	chk("eb_i0_db", p.EbI0DB, -30, 50, false)
	chk("activity_factor", p.ActivityFactor, 0, 1, true)
	chk("other_cell_ratio", p.OtherCellRatio, 0, 10, false)
	chk("sectors", p.Sectors, 1, 12, false)
	if len(v) > 0 {
		return 0, v
	}
	gp := p.ChipRateHz / p.BitRateBps
	ebi0 := math.Pow(10, p.EbI0DB/10)
	return gp / ebi0 / p.ActivityFactor / (1 + p.OtherCellRatio) * p.Sectors, nil
}

// PoleParamsOf reads the pole-capacity inputs from a scenario: W =
// receiver.chip_rate_hz, R = receiver.bit_rate_bps, Eb/I0 =
// outer_loop.initial_target_db (the fixed target when the outer loop is off,
// its start otherwise), ν = the user-weighted mean activity factor, f =
// receiver.other_cell_ratio, one sector (the simulation models one
// omnidirectional receiver).
func PoleParamsOf(sc loop.Scenario) PoleParams {
	sc = sc.Clone()
	sc.Normalise()
	var nu, n float64
	for _, g := range sc.Groups {
		if g.Count > 0 {
			nu += float64(g.Count) * g.ActivityFactor
			n += float64(g.Count)
		}
	}
	if n > 0 {
		nu /= n
	}
	return PoleParams{
		ChipRateHz:     sc.Receiver.ChipRateHz,
		BitRateBps:     sc.Receiver.BitRateBps,
		EbI0DB:         sc.OuterLoop.InitialTargetDB,
		ActivityFactor: nu,
		OtherCellRatio: sc.Receiver.OtherCellRatio,
		Sectors:        1,
	}
}

// CapacityRequest asks for the largest user count at one setting.
type CapacityRequest struct {
	// Base is the setting evaluated; its run.seed seeds every replication
	// (ReplicationSeed with condition 0, the same seeds for every count:
	// common random numbers) and run.replications is ignored.
	Base loop.Scenario `json:"base"`
	// Group is the index of the group whose count is scaled; its placement
	// must be uniform (explicit distances cannot be scaled).
	Group int `json:"group"`
	// OutageLimit is the largest acceptable outage probability (aggregate
	// over all users), (0, 1). A count passes when the mean outage over the
	// replications is at or below it, the mean noise rise is at or below
	// NoiseRiseLimitDB, and no replication's load was infeasible.
	OutageLimit float64 `json:"outage_limit"`
	// NoiseRiseLimitDB is the largest acceptable mean noise rise (rise over
	// thermal) at the receiver, dB, [0, 40]; 0 means
	// DefaultNoiseRiseLimitDB (6 dB).
	NoiseRiseLimitDB float64 `json:"noise_rise_limit_db"`
	// MinCount and MaxCount bound the group's count, [1, loop.MaxUsers −
	// other users]. MinCount 0 means 1; MaxCount 0 means search upward by
	// doubling from MinCount.
	MinCount int `json:"min_count"`
	MaxCount int `json:"max_count"`
	// Replications per evaluated count, [1, 1000]; 0 means 4.
	Replications int `json:"replications"`
	// Confidence of the reported intervals, [0.5, 0.9999]; 0 means 0.95.
	Confidence float64 `json:"confidence"`
	// MaxUserSlots bounds the simulated users × slots; 0 means no bound.
	MaxUserSlots int64 `json:"max_user_slots"`
}

// DefaultNoiseRiseLimitDB is the capacity search's noise-rise ceiling when
// none is given: 6 dB rise over thermal, i.e. an uplink load factor η of
// 75 % (noise rise = −10·log10(1 − η)). (common practice: uplink WCDMA
// planning keeps the load at 50–75 %, a noise rise of 3–6 dB, because near
// the pole every further user costs a large power increase and the cell
// shrinks.)
const DefaultNoiseRiseLimitDB = 6.0

// CapacityPoint is one evaluated count.
type CapacityPoint struct {
	// Count of the scaled group and TotalUsers over all groups.
	Count      int `json:"count"`
	TotalUsers int `json:"total_users"`
	// Pass = OutageOK && NoiseRiseOK && LoadFeasible.
	Pass bool `json:"pass"`
	// OutageOK: mean outage ≤ the outage limit. NoiseRiseOK: mean noise
	// rise ≤ the noise-rise limit. LoadFeasible: no replication was
	// flagged infeasible by the engine (load factor or spectral radius
	// ≥ 1, or users pinned at maximum power below target).
	// In multi-cell mode the engine computes no feasibility: LoadFeasible
	// is then true by construction and outputs show it as not computed.
	OutageOK     bool        `json:"outage_ok"`
	NoiseRiseOK  bool        `json:"noise_rise_ok"`
	LoadFeasible bool        `json:"load_feasible"`
	Figures      TuneFigures `json:"figures"`
	// OtherToOwn is, in multi-cell mode, the mean over the replications of
	// the layout's measured other-cell / own-cell interference ratio f
	// (LayoutOverall.other_to_own, linear); NaN in single-cell mode.
	OtherToOwn float64 `json:"-"`
}

// CapacityResult is the answer of Capacity.
type CapacityResult struct {
	// Count is the largest passing count of the group (0 when even MinCount
	// fails) and TotalUsers the users over all groups at that count.
	Count      int `json:"count"`
	TotalUsers int `json:"total_users"`
	// BelowRange: MinCount already fails. AtRangeTop: the largest count
	// tried passes (MaxCount, or the user limit of package loop).
	BelowRange bool `json:"below_range"`
	AtRangeTop bool `json:"at_range_top"`
	// Evaluated lists every evaluated count, ascending.
	Evaluated []CapacityPoint `json:"evaluated"`
	// Pole is the analytic pole capacity (total users) from PoleParamsOf,
	// with its inputs; PoleError says why it is missing, if it is. In
	// multi-cell mode it is the pole of one cell (one sector) with the
	// layout's measured f at the capacity count (PoleParams.OtherCellRatio,
	// Sectors 1: the site's other sectors are other cells, their
	// interference is part of f).
	Pole       float64    `json:"pole"`
	PoleParams PoleParams `json:"pole_params"`
	PoleError  string     `json:"pole_error,omitempty"`
	// ModelPole is the pole of the engine's own single-cell interference
	// equation, the total user count N* at which (1+f)·N·ν·γ/(G_p+γ) = 1
	// (γ the linear SIR target, G_p = W/R): N* = (G_p+γ)/(γ·ν·(1+f)). It
	// is the load at which no powers give every user its target (the
	// single-receiver form of Foschini & Miljanic, IEEE Trans. Veh. Technol.
	// 42(4), 1993); 0 when the inputs are out of range.
	ModelPole float64 `json:"model_pole"`
	// NonMonotone: some count above Count passed (the outage estimate is not
	// monotone in the count at this precision; the bisection result stands
	// but is less sharp).
	NonMonotone bool `json:"non_monotone"`
	// BudgetExhausted: MaxUserSlots ran out before the bisection closed;
	// Count is the largest count confirmed to pass and FailingCount the
	// smallest known to fail (0: none found yet).
	BudgetExhausted bool `json:"budget_exhausted"`
	FailingCount    int  `json:"failing_count"`
	// Replications and UserSlots spent.
	Replications int   `json:"replications"`
	UserSlots    int64 `json:"user_slots"`
	// OutageLimit and NoiseRiseLimitDB are the limits applied (defaults
	// filled in).
	OutageLimit      float64 `json:"outage_limit"`
	NoiseRiseLimitDB float64 `json:"noise_rise_limit_db"`
	// LimitedBy names what failed at the smallest failing count above
	// Count: any of "outage_probability", "noise_rise_mean_db" and
	// "infeasible_load" (empty when no count failed).
	LimitedBy []string `json:"limited_by"`
	// Headline is the first line of every text output, e.g. "Capacity: 55
	// users (outage ≤ 5.00 %, noise rise ≤ 6.00 dB, feasible load); limited
	// by noise rise."
	Headline string `json:"headline"`
	// Reason is a plain-language summary.
	Reason string `json:"reason"`
	// Notice is loop.Caution: simulated capacities do not replace the operator's planning.
	Notice string `json:"notice"`
}

// Capacity finds, by bisection over the count of one group with common
// random numbers, the largest count whose mean outage is at or below the
// limit, and puts the analytic pole capacity beside it. With a layout
// (multi-cell mode) the count is users per cell, outage and noise rise are
// the layout-wide figures (noise rise: mean over cells), feasibility is not
// computed, and the pole is that of one cell with the other-cell ratio f
// the layout measured at the capacity count (see CapacityResult.Pole).
// Bad requests return
// loop.Violations naming each field; a cancelled ctx returns ctx.Err().
// It is PlanCapacity followed by CapacityPlan.Run.
func Capacity(ctx context.Context, req CapacityRequest, opt Options) (*CapacityResult, error) {
	p, err := PlanCapacity(req)
	if err != nil {
		return nil, err
	}
	return p.Run(ctx, opt)
}

// Run answers the plan's request as Capacity does.
func (plan *CapacityPlan) Run(ctx context.Context, opt Options) (*CapacityResult, error) {
	req, set := plan.req, plan.set
	eval := capacityEvaluator(opt, set.base.MultiCell())
	base, others, top, lo, hi, reps, conf, nrLim := set.base, set.others, set.top, set.lo, set.hi, set.reps, set.conf, set.nrLim
	e := &engine{parallel: opt.Parallelism, progress: opt.Progress}
	res := &CapacityResult{OutageLimit: req.OutageLimit, NoiseRiseLimitDB: nrLim, Notice: loop.Caution}
	memo := map[int]*CapacityPoint{}
	seed := base.Run.Seed
	// eval1 evaluates count n; remaining is the number of counts left in
	// the bisection bracket (progress) and after the most counts the
	// search can evaluate after this one (fraction done).
	eval1 := func(n, remaining, after int) (bool, error) {
		if p, ok := memo[n]; ok {
			return p.Pass, nil
		}
		sc := base.Clone()
		sc.Groups[req.Group].Count = n
		if vv := multicell.Validate(sc); len(vv) > 0 {
			for i := range vv {
				vv[i].Rule += fmt.Sprintf(" (at count %d)", n)
			}
			return false, vv
		}
		cost := int64(reps) * userSlots(&sc)
		if req.MaxUserSlots > 0 && res.UserSlots+cost > req.MaxUserSlots {
			return false, &BudgetError{Field: "max_user_slots", NeedUserSlots: res.UserSlots + cost, LimitUserSlots: req.MaxUserSlots}
		}
		jobs := make([]job, reps)
		for r := range jobs {
			jobs[r] = job{k: n, r: r}
		}
		samples := make([]Sample, reps)
		fs := make([]float64, reps)
		e.remain = remaining
		e.left = reps * (1 + after)
		err := e.runJobs(ctx, jobs, func(ctx context.Context, j job) (Sample, error) {
			s := sc
			s.Run.Seed = ReplicationSeed(seed, 0, j.r)
			smp, f, err := eval(ctx, &s)
			fs[j.r] = f
			return smp, err
		}, func(j job, s Sample) {
			samples[j.r] = s
			res.Replications++
			res.UserSlots += s.UserSlots
		})
		if err != nil {
			return false, err
		}
		fg := figures(samples, conf)
		p := &CapacityPoint{Count: n, TotalUsers: others + n, Figures: fg,
			OutageOK:     fg.OutageProbability.Mean <= req.OutageLimit,
			NoiseRiseOK:  fg.NoiseRiseDB.Mean <= nrLim,
			LoadFeasible: fg.InfeasibleReplications == 0,
			OtherToOwn:   meanOf(fs),
		}
		p.Pass = p.OutageOK && p.NoiseRiseOK && p.LoadFeasible
		memo[n] = p
		return p.Pass, nil
	}
	// The most counts the bisection of the bracket (a, b) (a passes, b
	// fails) evaluates: ⌈log₂(b−a)⌉.
	bisect := func(a, b int) int { return bits.Len(uint(max(b-a, 1) - 1)) }
	// The most counts the doubling from a passing count a up to top, and
	// the bisection after it, evaluate.
	doubling := func(a int) int {
		d := 0
		for c := a; c < top; c = min(2*c, top) {
			d++
		}
		return d + bisect(a, top)
	}
	first := bisect(0, lo) // lo fails: bisect below it
	if hi != 0 {
		first = max(first, 1+bisect(lo, hi))
	} else {
		first = max(first, doubling(lo))
	}
	ok, err := eval1(lo, 0, first)
	if err != nil {
		return nil, err
	}
	// search narrows [lo, hi) (lo passes, hi fails or is 0: unknown); a
	// budget stop after the first count keeps the bracket found so far.
	search := func() error {
		switch {
		case !ok:
			res.BelowRange = true
			hi = lo
			lo = 0
		case hi != 0:
			ok, err := eval1(hi, hi-lo-1, bisect(lo, hi))
			if err != nil {
				return err
			}
			if ok {
				res.AtRangeTop = true
				lo = hi
			}
		default:
			// Expanding search: double until a count fails or the top is
			// reached.
			for {
				next := min(2*lo, top)
				if next == lo {
					res.AtRangeTop = true
					hi = lo
					break
				}
				ok, err := eval1(next, 0, max(doubling(next), bisect(lo, next)))
				if err != nil {
					return err
				}
				if !ok {
					hi = next
					break
				}
				lo = next
			}
		}
		for hi-lo > 1 {
			mid := lo + (hi-lo)/2
			ok, err := eval1(mid, hi-lo-1, max(bisect(lo, mid), bisect(mid, hi)))
			if err != nil {
				return err
			}
			if ok {
				lo = mid
			} else {
				hi = mid
			}
		}
		return nil
	}
	if err := search(); err != nil {
		var be *BudgetError
		if !errors.As(err, &be) {
			return nil, err
		}
		res.BudgetExhausted = true
		res.FailingCount = hi
	}
	res.Count = lo
	res.TotalUsers = others + lo
	if lo == 0 {
		res.TotalUsers = others
	}
	for _, p := range memo {
		res.Evaluated = append(res.Evaluated, *p)
		if p.Pass && p.Count > res.Count {
			res.NonMonotone = true
		}
	}
	sort.Slice(res.Evaluated, func(i, j int) bool { return res.Evaluated[i].Count < res.Evaluated[j].Count })
	var fail *CapacityPoint
	for i := range res.Evaluated {
		if p := &res.Evaluated[i]; !p.Pass && p.Count > res.Count && (fail == nil || p.Count < fail.Count) {
			fail = p
		}
	}
	if fail != nil {
		res.LimitedBy = failures(fail)
	}
	setPole(res, base)
	unit := "users"
	if base.MultiCell() {
		unit = "users per cell" // counts, totals and the one-cell pole
	}
	res.Headline, res.Reason = capacityReason(res, fail, unit, base, conf)
	e.report(true)
	return res, nil
}

// failures names the limits a count misses.
func failures(p *CapacityPoint) []string {
	var out []string
	if !p.OutageOK {
		out = append(out, FigureOutage)
	}
	if !p.NoiseRiseOK {
		out = append(out, FigureNoiseRise)
	}
	if !p.LoadFeasible {
		out = append(out, "infeasible_load")
	}
	return out
}

// pointText is "outage 3.10 % [2.80, 3.40] %, noise rise 4.20 dB at 40
// users" (unit: "users", or "users per cell" in multi-cell mode).
func pointText(p *CapacityPoint, unit string) string {
	o, n := FigureLabelOf(FigureOutage), FigureLabelOf(FigureNoiseRise)
	s := fmt.Sprintf("outage %s, noise rise %s at %d %s", o.Estimate(p.Figures.OutageProbability),
		n.Estimate(p.Figures.NoiseRiseDB), p.TotalUsers, unit)
	if k := p.Figures.InfeasibleReplications; k > 0 {
		s += fmt.Sprintf(", load infeasible in %d of %d replications", k, p.Figures.OutageProbability.N)
	}
	return s
}

// capacityReason is the headline and reason of res; unit names the counts
// ("users", or "users per cell" in multi-cell mode, where the headline
// also gives the layout's total and claims no feasibility), base is the
// setting searched and conf the intervals' confidence.
func capacityReason(res *CapacityResult, fail *CapacityPoint, unit string, base loop.Scenario, conf float64) (headline, reason string) {
	limits := capacityLimits(res, base.MultiCell())
	var at *CapacityPoint
	for i := range res.Evaluated {
		if res.Evaluated[i].Count == res.Count {
			at = &res.Evaluated[i]
		}
	}
	names := map[string]string{FigureOutage: "outage", FigureNoiseRise: "noise rise", "infeasible_load": "infeasible load"}
	var lim []string
	for _, k := range res.LimitedBy {
		lim = append(lim, names[k])
	}
	by := ""
	if len(lim) > 0 {
		by = "; limited by " + strings.Join(lim, " and ")
	}
	var first string
	switch {
	case res.BelowRange:
		// The requested smallest count failed, so the search went below
		// it: every evaluated count is at most MinCount, which is the
		// largest of them.
		p := &res.Evaluated[len(res.Evaluated)-1]
		headline = fmt.Sprintf("Capacity: below the range tried: %d %s already miss %s%s.", p.TotalUsers, unit, limits, by)
		first = fmt.Sprintf("Even the smallest count tried misses the limits (%s).", pointText(p, unit))
	case res.AtRangeTop:
		headline = fmt.Sprintf("Capacity: at least %d %s%s (%s); the largest count tried passes.", res.TotalUsers, unit, layoutUsers(res.TotalUsers, base), limits)
		first = fmt.Sprintf("All %d %s tried meet the limits (%s).", res.TotalUsers, unit, pointText(at, unit))
	default:
		headline = fmt.Sprintf("Capacity: %d %s%s (%s)%s.", res.TotalUsers, unit, layoutUsers(res.TotalUsers, base), limits, by)
		first = fmt.Sprintf("Up to %d %s meet the limits (%s)", res.TotalUsers, unit, pointText(at, unit))
		if fail != nil {
			first += fmt.Sprintf("; %d %s miss them (%s)", fail.TotalUsers, unit, pointText(fail, unit))
		}
		first += "."
	}
	var caution string
	if !res.BelowRange {
		caution = unseparated(res, at, unit, conf)
	}
	pole := poleSentence(res, base, unit)
	var nm string
	if res.BudgetExhausted {
		nm = "The budget ran out before the bisection closed: the count is the largest confirmed to pass"
		if res.FailingCount > 0 {
			nm += fmt.Sprintf(", %d (group count) is known to fail", res.FailingCount)
		}
		nm += "."
	}
	if res.NonMonotone {
		nm = join(nm, "The pass/fail outcome was not monotone in the count at this precision; more replications would sharpen the answer.")
	}
	return headline, join(first, caution, pole, nm)
}
