package tune

import (
	"context"
	"fmt"
	"math"

	"github.com/fadeloop/fadeloop/loop"
)

// This file is the Tune driver: it builds the candidates of a plan, runs
// the search and the fixed-power baselines and assembles the
// recommendation.

// Tune answers req: every candidate of the grid under every condition, with
// common random numbers and sequential allocation of replications (see the
// package documentation). Bad requests return loop.Violations naming each
// field; a budget too small for the first round returns *BudgetError; a
// cancelled ctx stops every run and returns ctx.Err(). The result is
// identical for identical requests whatever opt.Parallelism or GOMAXPROCS.
// It is PlanTune followed by TunePlan.Run.
func Tune(ctx context.Context, req Request, opt Options) (*Recommendation, error) {
	p, err := PlanTune(req)
	if err != nil {
		return nil, err
	}
	return p.Run(ctx, opt)
}

// Run answers the plan's request as Tune does: it builds and validates
// every candidate scenario under every condition (a violation of a
// combination of axis values and overrides is reported here, after
// admission), then runs the search.
func (p *TunePlan) Run(ctx context.Context, opt Options) (*Recommendation, error) {
	eval := evaluatorFor(opt)
	req, grid, set := p.req, p.grid, p.set
	pts := grid.Points()
	scs, v := buildScenarios(req.Base, pts, set.conds)
	if len(v) > 0 {
		return nil, v
	}
	seed := req.Base.Run.Seed
	e := &engine{
		nK: len(pts), nC: len(set.conds), w: set.weights,
		obj: req.Objective, conf: set.conf,
		minReps: set.minReps, maxReps: set.maxReps, batch: set.batchReps,
		maxUserSlots: set.maxUserSlots,
		jobCost:      func(k, c int) int64 { return userSlots(&scs[k][c]) },
		tieLess: func(a, b int) bool {
			less, _ := tieOrder(pts[a], pts[b])
			return less
		},
		parallel:   opt.Parallelism,
		progress:   opt.Progress,
		minRunCost: minRunCost(req, scs, set.conds),
		run: func(ctx context.Context, k, c, r int) (Sample, error) {
			sc := scs[k][c]
			sc.Run.Seed = ReplicationSeed(seed, c, r)
			return eval(ctx, &sc)
		},
	}
	if !req.SkipBaseline {
		e.baselineRuns = len(set.conds) * set.maxReps
	}
	outs, err := e.search(ctx)
	if err != nil {
		return nil, err
	}
	rec := &Recommendation{
		Objective:  req.Objective,
		Confidence: set.conf,
		Axes:       grid.Axes,
		Candidates: pts,
		Effort:     e.effort,
		Seed:       seed,
		TieRule:    TieRule,
		Figures:    FigureLabels(),
		Notice:     loop.Caution,
	}
	for c, cd := range set.conds {
		o := outs[c]
		cr := ConditionResult{Name: cd.Name, Weight: cd.Weight}
		cr.Candidates = make([]CandidateResult, len(pts))
		for k := range pts {
			cr.Candidates[k] = CandidateResult{
				Candidate:  k,
				Figures:    figures(e.samples[k][c], set.conf),
				Objective:  o.score[k],
				DiffToBest: o.diff[k],
				Status:     o.status[k],
				Feasible:   o.feasible[k],
			}
		}
		cr.Decision = decision(o, pts, req.Objective)
		cr.DopplerProductMin, cr.DopplerProductMax, cr.SpeedsKmh = DopplerRange(scs[o.chosen][c])
		rec.Conditions = append(rec.Conditions, cr)
	}
	if !req.SkipBaseline {
		if err := runBaselines(ctx, req, set, e, outs, rec, eval); err != nil {
			return nil, err
		}
	}
	last := outs[len(outs)-1]
	rec.Overall = decision(last, pts, req.Objective)
	rec.OverallCandidates = make([]CandidateResult, len(pts))
	for k := range pts {
		rec.OverallCandidates[k] = CandidateResult{
			Candidate: k, Objective: last.score[k], DiffToBest: last.diff[k],
			Status: last.status[k], Feasible: last.feasible[k],
		}
	}
	for c := range rec.Conditions {
		finishDecision(rec, &rec.Conditions[c].Decision, []int{c}, rec.Conditions[c].Candidates)
		rec.Conditions[c].Decision.Reason = conditionReason(rec, c)
	}
	all := make([]int, len(rec.Conditions))
	for c := range all {
		all[c] = c
	}
	finishDecision(rec, &rec.Overall, all, rec.OverallCandidates)
	rec.Overall.Reason = overallReason(rec)
	e.report(true)
	return rec, nil
}

// runBaselines runs the fixed-power baseline of every condition on the seeds
// of the recommended candidate's replications and fills rec.Conditions[c].
// Baseline.
func runBaselines(ctx context.Context, req Request, set settings, e *engine, outs []scopeOutcome, rec *Recommendation, eval evaluator) error {
	seed := req.Base.Run.Seed
	bases := make([]loop.Scenario, len(set.conds))
	var jobs []job
	var cost int64
	for c, cd := range set.conds {
		sc := req.Base.Clone()
		if err := cd.Apply(&sc); err != nil {
			return err
		}
		sc.InnerLoop.Mode = loop.InnerModeFixedPower
		sc.Run.Replications = 1
		sc.Normalise()
		if vv := sc.Validate(); len(vv) > 0 {
			for i := range vv {
				vv[i].Rule += fmt.Sprintf(" (fixed-power baseline, condition %q)", cd.Name)
			}
			return vv
		}
		bases[c] = sc
		n := len(e.samples[outs[c].chosen][c])
		for r := 0; r < n; r++ {
			jobs = append(jobs, job{k: 0, c: c, r: r})
		}
		cost += int64(n) * userSlots(&sc)
	}
	if set.maxUserSlots > 0 && e.effort.UserSlots+cost > set.maxUserSlots {
		// Not enough budget left for the full baseline: run the first
		// MinReplications only, or none when even that does not fit.
		jobs = jobs[:0]
		cost = 0
		for c := range set.conds {
			for r := 0; r < set.minReps; r++ {
				jobs = append(jobs, job{k: 0, c: c, r: r})
			}
			cost += int64(set.minReps) * userSlots(&bases[c])
		}
		if e.effort.UserSlots+cost > set.maxUserSlots {
			e.left = 0
			return nil
		}
	}
	samples := make([][]Sample, len(set.conds))
	e.left = len(jobs)
	err := e.runJobs(ctx, jobs, func(ctx context.Context, j job) (Sample, error) {
		sc := bases[j.c]
		sc.Run.Seed = ReplicationSeed(seed, j.c, j.r)
		return eval(ctx, &sc)
	}, func(j job, s Sample) {
		samples[j.c] = append(samples[j.c], s)
		e.effort.BaselineReplications++
		e.effort.UserSlots += s.UserSlots
	})
	if err != nil {
		return err
	}
	rec.Effort = e.effort
	lab, judge := req.Objective.baselineJudge()
	for c := range set.conds {
		chosen := e.samples[outs[c].chosen][c]
		a := make([]float64, len(chosen))
		for r, s := range chosen {
			a[r] = judge(s)
		}
		b := make([]float64, len(samples[c]))
		for r, s := range samples[c] {
			b[r] = judge(s)
		}
		gain, _ := pairedDiff(a, b, set.conf, nil)
		bl := &Baseline{
			Figures: figures(samples[c], set.conf), Figure: lab,
			Fixed: meanCI(b, set.conf), Recommended: meanCI(a, set.conf), Gain: gain,
		}
		if lab.Key == "outage_probability" {
			bl.Fixed = clampEstimate(bl.Fixed, 0, 1)
			bl.Recommended = clampEstimate(bl.Recommended, 0, 1)
		}
		if req.Objective.Kind == ObjectiveMinTxPower {
			bl.FixedMisses = len(missesOf(req.Objective, set.conds[c].Name, bl.Figures)) > 0
			bl.BarelyHelps = !bl.FixedMisses && (gain.Low <= 0 || gain.Mean < BarelyHelpsPowerDB)
		} else {
			bl.BarelyHelps = gain.Low <= 0 || gain.Mean < BarelyHelpsFraction*math.Abs(bl.Fixed.Mean)
		}
		bl.Text = baselineText(rec, c, bl)
		rec.Conditions[c].Baseline = bl
	}
	return nil
}

// minRunCost is the user-slots of the cheapest run of a tune over the
// candidate scenarios scs ([k][c]): a candidate's, or the fixed-power
// baseline's of a condition (the condition applied to the base: the
// baseline changes no field that sets the work).
func minRunCost(req Request, scs [][]loop.Scenario, conds []Condition) int64 {
	m := int64(math.MaxInt64)
	for k := range scs {
		for c := range scs[k] {
			m = min(m, userSlots(&scs[k][c]))
		}
	}
	if !req.SkipBaseline {
		for _, cd := range conds {
			if sc, err := cd.ApplyTo(req.Base); err == nil {
				sc.Normalise()
				m = min(m, userSlots(&sc))
			}
		}
	}
	return m
}

// userSlots is the work of one replication of sc.
func userSlots(sc *loop.Scenario) int64 {
	return int64(sc.Users()) * sc.TotalSlots()
}
