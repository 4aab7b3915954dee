package tune

import (
	"context"
	"fmt"
	"math"
	"sort"
)

// Sample is the figures of one replication of one candidate under one
// condition, as the engine reports them for that run (aggregate over users).
type Sample struct {
	// SIRErrorMeanDB and SIRErrorStdDB: mean and standard deviation of
	// the SIR error (true SIR minus the current target) over users and
	// measured slots, dB.
	SIRErrorMeanDB float64 `json:"sir_error_mean_db"`
	SIRErrorStdDB  float64 `json:"sir_error_std_db"`
	// OutageProbability: fraction of user-slots with SIR below target minus the
	// outage margin, [0, 1].
	OutageProbability float64 `json:"outage_probability"`
	// BLER: achieved block error rate, [0, 1]; BLERTarget the outer loop's
	// target τ, or 0 when the outer loop is off (no BLER constraint then).
	BLER       float64 `json:"achieved_bler"`
	BLERTarget float64 `json:"bler_target"`
	// TxPowerMeanDBm: mean transmit power over users and slots, dBm.
	TxPowerMeanDBm float64 `json:"tx_power_mean_dbm"`
	// TimeAtMaxPower: fraction of user-slots at maximum power, [0, 1].
	TimeAtMaxPower float64 `json:"max_power_fraction"`
	// NoiseRiseDB: mean noise rise at the receiver, dB.
	NoiseRiseDB float64 `json:"noise_rise_mean_db"`
	// UserSlots simulated (users × slots, warm-up included).
	UserSlots int64 `json:"user_slots"`
	// Infeasible is set when the engine reported that the users cannot all
	// reach their target.
	Infeasible bool `json:"infeasible"`
}

// runFunc evaluates replication r of candidate k under condition c. Every
// candidate under one condition gets the same seed for replication r
// (common random numbers).
type runFunc func(ctx context.Context, k, c, r int) (Sample, error)

// CandidateStatus is where a candidate stands in the sequential procedure
// for one condition (or across conditions).
type CandidateStatus int

const (
	// StatusContending: still compared when the procedure stopped (budget
	// or replication cap reached, or it is the best).
	StatusContending CandidateStatus = iota + 1
	// StatusDropped: its paired difference to the best lay entirely above
	// zero (Bonferroni-adjusted level), or it clearly missed the
	// constraints; it got no further replications.
	StatusDropped
	// StatusEquivalent: its paired difference to the best lay inside the
	// indifference zone; no more replications were needed to place it.
	StatusEquivalent
)

// String returns a short name.
func (s CandidateStatus) String() string {
	switch s {
	case StatusContending:
		return "contending"
	case StatusDropped:
		return "dropped"
	case StatusEquivalent:
		return "equivalent"
	}
	return fmt.Sprintf("CandidateStatus(%d)", int(s))
}

// Progress is reported while a search runs.
type Progress struct {
	// Stage counts the rounds of the sequential procedure (0 = the first
	// MinReplications of every candidate).
	Stage int `json:"stage"`
	// CandidatesRemaining is the number of candidates still in contention in
	// at least one condition (or across conditions).
	CandidatesRemaining int `json:"candidates_remaining"`
	// ReplicationsDone counts finished candidate runs (one replication of one
	// candidate under one condition), baseline runs included.
	ReplicationsDone int `json:"replications_done"`
	// UserSlotsDone is the simulated work so far (users × slots).
	UserSlotsDone int64 `json:"user_slots_done"`
	// FractionDone is ReplicationsDone over the most runs the search can
	// take, re-bounded as it goes (Tune: MaxReplications of every candidate
	// not yet dropped for good plus the baseline runs, no more than the
	// budget left buys; Capacity: the replications of the counts the
	// bisection bracket can still need), [0, 1]. It never decreases, stays
	// below 1 while runs go on and is exactly 1 in the last report, when
	// the answer is ready.
	FractionDone float64 `json:"fraction_done"`
}

// Effort is the work a search spent.
type Effort struct {
	// Replications counts candidate runs (replication × candidate ×
	// condition), baseline runs excluded.
	Replications int `json:"replications"`
	// BaselineReplications counts the fixed-power baseline runs.
	BaselineReplications int `json:"baseline_replications"`
	// UserSlots is the simulated work of all runs (users × slots).
	UserSlots int64 `json:"user_slots"`
	// Stages is the number of rounds of the sequential procedure.
	Stages int `json:"stages"`
	// MaxReplicationsUsed is the largest replication count any candidate
	// reached under any condition.
	MaxReplicationsUsed int `json:"max_replications_used"`
	// EqualAllocationReplications is what running every candidate under
	// every condition to MaxReplicationsUsed would have cost (candidates ×
	// conditions × MaxReplicationsUsed), the non-sequential alternative at
	// the same final precision.
	EqualAllocationReplications int `json:"equal_allocation_replications"`
	// BudgetExhausted is set when the procedure stopped because the next
	// round would have exceeded MaxUserSlots, or candidates still in
	// contention reached MaxReplications.
	BudgetExhausted bool `json:"budget_exhausted"`
}

// BudgetError is returned when the budget cannot even pay for the first
// MinReplications of every candidate under every condition (Tune), or for
// the next count of the bisection (Capacity).
type BudgetError struct {
	Field          string // request field of the bound, e.g. "budget.max_user_slots"
	NeedUserSlots  int64  // user-slots needed to give an answer at all
	LimitUserSlots int64  // the bound
}

// Error names the budget field and both figures.
func (e *BudgetError) Error() string {
	return fmt.Sprintf("%s: an answer needs at least %d user-slots, the budget allows %d",
		e.Field, e.NeedUserSlots, e.LimitUserSlots)
}

// engine is the sequential, paired comparison of nK candidates under nC
// conditions (scope nC, when nC > 1, is the weighted combination).
type engine struct {
	nK, nC       int
	w            []float64 // condition weights, normalised to sum 1
	obj          Objective
	conf         float64
	minReps      int
	maxReps      int
	batch        int
	maxUserSlots int64 // 0: unlimited
	jobCost      func(k, c int) int64
	tieLess      func(a, b int) bool
	parallel     int
	progress     func(Progress)
	run          runFunc

	samples [][][]Sample // [k][c][r]
	dropped [][]bool     // [scope][k]
	equiv   [][]bool     // [scope][k] (last stage)
	effort  Effort
	stage   int
	remain  int

	// Progress (written between rounds and by the pool's serialised
	// done callback).
	progDone     int     // runs finished
	progWork     int64   // their user-slots
	left         int     // the most runs the search can still take
	frac         float64 // the last reported fraction done
	baselineRuns int     // the most fixed-power baseline runs (0: none)
	minRunCost   int64   // user-slots of the cheapest run (budget bound)
}

func (e *engine) nScopes() int {
	if e.nC > 1 {
		return e.nC + 1
	}
	return e.nC
}

func (e *engine) constrained() bool { return e.obj.constrained() }

// scores returns the per-replication objective values of candidate k in
// scope s; fallback selects the worst relative constraint excess instead
// (Objective.Excess, the ranking when no candidate meets the constraints).
func (e *engine) scores(s, k int, fallback bool) []float64 {
	f := e.obj.score
	if fallback {
		f = e.obj.Excess
	}
	if s < e.nC {
		xs := make([]float64, len(e.samples[k][s]))
		for r, x := range e.samples[k][s] {
			xs[r] = f(x)
		}
		return xs
	}
	n := e.minN(k)
	xs := make([]float64, n)
	for r := 0; r < n; r++ {
		var v float64
		for c := 0; c < e.nC; c++ {
			v += e.w[c] * f(e.samples[k][c][r])
		}
		xs[r] = v
	}
	return xs
}

func (e *engine) minN(k int) int {
	n := math.MaxInt
	for c := 0; c < e.nC; c++ {
		n = min(n, len(e.samples[k][c]))
	}
	return n
}

// feas is the constraint status of a candidate in a scope.
type feas struct {
	est        bool // point estimates meet the constraints
	clearlyIn  bool // the intervals lie inside the constraints
	clearlyOut bool // an interval lies entirely outside a constraint
}

func (e *engine) feasCond(k, c int, conf float64) feas {
	xs := e.samples[k][c]
	f := feas{est: true, clearlyIn: true}
	// upper applies one "figure ≤ limit" constraint.
	upper := func(get func(Sample) float64, lim float64) {
		v := make([]float64, len(xs))
		for r, x := range xs {
			v[r] = get(x)
		}
		o := meanCI(v, conf)
		f.est = f.est && o.Mean <= lim
		f.clearlyIn = f.clearlyIn && o.High <= lim
		f.clearlyOut = f.clearlyOut || o.Low > lim
	}
	if lim := e.obj.OutageLimit; lim > 0 {
		upper(func(x Sample) float64 { return x.OutageProbability }, lim)
	}
	if lim := e.obj.NoiseRiseLimitDB; lim > 0 {
		upper(func(x Sample) float64 { return x.NoiseRiseDB }, lim)
	}
	if len(xs) > 0 && e.obj.blerActive(xs[0].BLERTarget) {
		ratio := make([]float64, len(xs))
		for r, x := range xs {
			ratio[r] = x.BLER / x.BLERTarget
		}
		b := meanCI(ratio, conf)
		tol := e.obj.blerTol()
		lo, hi := 1-tol, 1+tol
		f.est = f.est && b.Mean >= lo && b.Mean <= hi
		f.clearlyIn = f.clearlyIn && b.Low >= lo && b.High <= hi
		f.clearlyOut = f.clearlyOut || b.High < lo || b.Low > hi
	}
	return f
}

func (e *engine) feasibility(s, k int, conf float64) feas {
	if !e.constrained() {
		return feas{est: true, clearlyIn: true}
	}
	if s < e.nC {
		return e.feasCond(k, s, conf)
	}
	all := feas{est: true, clearlyIn: true}
	for c := 0; c < e.nC; c++ {
		f := e.feasCond(k, c, conf)
		all.est = all.est && f.est
		all.clearlyIn = all.clearlyIn && f.clearlyIn
		all.clearlyOut = all.clearlyOut || f.clearlyOut
	}
	return all
}

// scopeOutcome is the decision in one scope at the stated confidence.
type scopeOutcome struct {
	best, chosen, runnerUp int
	evidence               ReplicationEstimate // paired diff runner-up − best
	declared               bool
	tieSet                 []int
	fallback               bool  // constraints met by no candidate: ranked by Objective.Excess
	ordering               []int // chosen first, then the rest of the tie set, then by class and diff
	status                 []CandidateStatus
	score                  []ReplicationEstimate // objective per candidate
	diff                   []ReplicationEstimate // paired diff k − best (final: k − chosen)
	feasible               []bool
	undecided              []bool
}

// decide ranks the candidates of scope s on the data so far. With final it
// works at the stated confidence and fills the tie set; otherwise it updates
// the dropped/equivalent marks at the Bonferroni-adjusted level.
func (e *engine) decide(s int, final bool) scopeOutcome {
	confPair := e.conf
	if !final && e.nK > 2 {
		confPair = 1 - (1-e.conf)/float64(e.nK-1)
	}
	o := scopeOutcome{
		status:    make([]CandidateStatus, e.nK),
		score:     make([]ReplicationEstimate, e.nK),
		diff:      make([]ReplicationEstimate, e.nK),
		feasible:  make([]bool, e.nK),
		undecided: make([]bool, e.nK),
		runnerUp:  -1,
	}
	fs := make([]feas, e.nK)
	anyFeas, anyClearlyIn, anyFeasAll := false, false, false
	for k := 0; k < e.nK; k++ {
		fs[k] = e.feasibility(s, k, e.conf)
		o.feasible[k] = fs[k].est
		anyFeasAll = anyFeasAll || fs[k].est
		if !e.dropped[s][k] {
			anyFeas = anyFeas || fs[k].est
			anyClearlyIn = anyClearlyIn || fs[k].clearlyIn
		}
	}
	// The final verdict never says "constraints unmet" while some candidate
	// meets them: if only dropped candidates do, they rejoin the ranking.
	revive := final && !anyFeas && anyFeasAll
	if revive {
		anyFeas = true
	}
	o.fallback = e.constrained() && !anyFeas
	sc := make([][]float64, e.nK)
	class := make([]int, e.nK)
	alive := make([]int, 0, e.nK)
	for k := 0; k < e.nK; k++ {
		sc[k] = e.scores(s, k, o.fallback)
		o.score[k] = meanCI(sc[k], e.conf)
		if e.constrained() && !o.fallback && !fs[k].est {
			class[k] = 1
		}
		if !e.dropped[s][k] || revive {
			alive = append(alive, k)
		}
	}
	sort.SliceStable(alive, func(i, j int) bool {
		a, b := alive[i], alive[j]
		if class[a] != class[b] {
			return class[a] < class[b]
		}
		return o.score[a].Mean < o.score[b].Mean
	})
	best := alive[0]
	o.best = best
	indiff := e.obj.indifference(o.score[best].Mean)
	var buf []float64
	need := false
	for k := 0; k < e.nK; k++ {
		if k == best {
			continue
		}
		o.diff[k], buf = pairedDiff(sc[best], sc[k], confPair, buf)
		if e.dropped[s][k] {
			o.status[k] = StatusDropped
			continue
		}
		if final {
			o.status[k] = StatusContending
			if e.equiv[s][k] {
				o.status[k] = StatusEquivalent
			}
			continue
		}
		d := o.diff[k]
		switch {
		case e.constrained() && !o.fallback && fs[k].clearlyOut && anyClearlyIn:
			e.dropped[s][k] = true
		case d.Low > 0 && (!e.constrained() || o.fallback || fs[best].clearlyIn) && class[k] >= class[best]:
			e.dropped[s][k] = true
		case d.Low >= -indiff && d.High <= indiff && class[k] == class[best]:
			e.equiv[s][k] = true
		default:
			e.equiv[s][k] = false
			o.undecided[k] = true
			need = true
		}
		switch {
		case e.dropped[s][k]:
			o.status[k] = StatusDropped
		case e.equiv[s][k]:
			o.status[k] = StatusEquivalent
		default:
			o.status[k] = StatusContending
		}
	}
	o.status[best] = StatusContending
	o.diff[best] = ReplicationEstimate{N: o.score[best].N}
	if !final {
		if e.constrained() {
			if !o.fallback && !fs[best].clearlyIn {
				need = true
			}
			if o.fallback {
				for _, k := range alive {
					if !fs[k].clearlyOut && !e.dropped[s][k] {
						need = true
						o.undecided[k] = true
					}
				}
			}
		}
		if need {
			o.undecided[best] = true
		}
		return o
	}
	// Final decision at the stated confidence: the tie set is the best plus
	// every surviving candidate of the same class whose paired interval
	// against the best reaches down to zero.
	o.tieSet = []int{best}
	ru := -1
	for _, k := range alive {
		if k == best || class[k] != class[best] {
			continue
		}
		if o.diff[k].Low <= 0 {
			o.tieSet = append(o.tieSet, k)
		}
		if ru < 0 || o.diff[k].Mean < o.diff[ru].Mean {
			ru = k
		}
	}
	if ru < 0 {
		// Nobody of the best's class is left: the runner-up is the
		// closest of all the others.
		for k := 0; k < e.nK; k++ {
			if k == best {
				continue
			}
			if ru < 0 || class[k] < class[ru] || (class[k] == class[ru] && o.diff[k].Mean < o.diff[ru].Mean) {
				ru = k
			}
		}
	}
	o.declared = len(o.tieSet) == 1 && ru >= 0
	o.chosen = best
	for _, k := range o.tieSet[1:] {
		if e.tieLess(k, o.chosen) {
			o.chosen = k
		}
	}
	// Everything reported from here on is relative to the chosen
	// (recommended) candidate, so that the first row of every table, the
	// runner-up's difference and every "best" named anywhere agree.
	ch := o.chosen
	for k := 0; k < e.nK; k++ {
		if k == ch {
			o.diff[k] = ReplicationEstimate{N: o.score[k].N}
			continue
		}
		o.diff[k], buf = pairedDiff(sc[ch], sc[k], e.conf, buf)
	}
	inTie := make([]bool, e.nK)
	for _, k := range o.tieSet {
		inTie[k] = true
	}
	o.ordering = make([]int, 0, e.nK)
	for k := 0; k < e.nK; k++ {
		if k != ch {
			o.ordering = append(o.ordering, k)
		}
	}
	sort.SliceStable(o.ordering, func(i, j int) bool {
		a, b := o.ordering[i], o.ordering[j]
		if inTie[a] != inTie[b] {
			return inTie[a]
		}
		if inTie[a] {
			return e.tieLess(a, b)
		}
		if class[a] != class[b] {
			return class[a] < class[b]
		}
		if o.diff[a].Mean != o.diff[b].Mean {
			return o.diff[a].Mean < o.diff[b].Mean
		}
		return a < b
	})
	o.ordering = append([]int{ch}, o.ordering...)
	o.status[ch] = StatusContending
	o.runnerUp = -1
	o.evidence = ReplicationEstimate{}
	if len(o.ordering) > 1 {
		o.runnerUp = o.ordering[1]
		o.evidence = o.diff[o.runnerUp]
	}
	return o
}

type job struct{ k, c, r int }

// runJobs runs the jobs on the package's worker pool (up to e.parallel at
// once), reports progress after each, and then stores each sample at its
// (k, c, r) place in job order, so the merge order is fixed whatever the
// parallelism. Nothing is stored when a job fails.
func (e *engine) runJobs(ctx context.Context, jobs []job, work func(ctx context.Context, j job) (Sample, error), store func(j job, s Sample)) error {
	out, err := collect(ctx, len(jobs), e.parallel,
		func(ctx context.Context, i int) (Sample, error) { return work(ctx, jobs[i]) },
		func(_ int, s Sample) { e.tick(s.UserSlots) })
	if err != nil {
		return err
	}
	for i, j := range jobs {
		store(j, out[i])
	}
	return nil
}

// tick counts one finished run (userSlots of work) and reports progress.
// The pool serialises its calls.
func (e *engine) tick(userSlots int64) {
	e.progDone++
	e.progWork += userSlots
	e.left = max(e.left-1, 0)
	e.report(false)
}

// report calls the progress callback, if any. FractionDone is the runs
// done over the runs done plus e.left, the most runs the search can still
// take; it never decreases, stays below 1 while the search runs and is 1
// exactly in the final report.
func (e *engine) report(final bool) {
	if e.progress == nil {
		return
	}
	f := 1.0
	if !final {
		f = 0
		if all := e.progDone + e.left; all > 0 {
			f = float64(e.progDone) / float64(all)
		}
		f = min(max(f, e.frac), math.Nextafter(1, 0))
	}
	e.frac = f
	e.progress(Progress{Stage: e.stage, CandidatesRemaining: e.remain, ReplicationsDone: e.progDone,
		UserSlotsDone: e.progWork, FractionDone: f})
}

// candidateRunsLeft is the most candidate runs the sequential procedure can
// still start: MaxReplications less the replications so far of every
// (candidate, condition) that is not dropped for good (dropped in its
// condition and, with several conditions, across conditions too), and no
// more than the budget left buys at the cheapest run.
func (e *engine) candidateRunsLeft() int {
	left := 0
	nS := e.nScopes()
	for k := 0; k < e.nK; k++ {
		for c := 0; c < e.nC; c++ {
			if e.dropped[c][k] && (nS == e.nC || e.dropped[e.nC][k]) {
				continue
			}
			left += max(e.maxReps-len(e.samples[k][c]), 0)
		}
	}
	return e.budgetCap(left)
}

// budgetCap bounds n runs by what the budget left buys at the cheapest run.
func (e *engine) budgetCap(n int) int {
	if e.maxUserSlots > 0 && e.minRunCost > 0 {
		n = min(n, int(max(e.maxUserSlots-e.effort.UserSlots, 0)/e.minRunCost))
	}
	return n
}

func (e *engine) cost(jobs []job) int64 {
	var c int64
	for _, j := range jobs {
		c += e.jobCost(j.k, j.c)
	}
	return c
}

// search runs the sequential procedure and returns the final outcome per
// scope.
func (e *engine) search(ctx context.Context) ([]scopeOutcome, error) {
	nS := e.nScopes()
	e.samples = make([][][]Sample, e.nK)
	for k := range e.samples {
		e.samples[k] = make([][]Sample, e.nC)
	}
	e.dropped = make([][]bool, nS)
	e.equiv = make([][]bool, nS)
	for s := range e.dropped {
		e.dropped[s] = make([]bool, e.nK)
		e.equiv[s] = make([]bool, e.nK)
	}
	store := func(j job, s Sample) {
		e.samples[j.k][j.c] = append(e.samples[j.k][j.c], s)
		e.effort.Replications++
		e.effort.UserSlots += s.UserSlots
		e.effort.MaxReplicationsUsed = max(e.effort.MaxReplicationsUsed, len(e.samples[j.k][j.c]))
	}
	work := func(ctx context.Context, j job) (Sample, error) { return e.run(ctx, j.k, j.c, j.r) }

	// Round 0: MinReplications of everything.
	var jobs []job
	for k := 0; k < e.nK; k++ {
		for c := 0; c < e.nC; c++ {
			for r := 0; r < e.minReps; r++ {
				jobs = append(jobs, job{k, c, r})
			}
		}
	}
	if need := e.cost(jobs); e.maxUserSlots > 0 && need > e.maxUserSlots {
		return nil, &BudgetError{Field: "budget.max_user_slots", NeedUserSlots: need, LimitUserSlots: e.maxUserSlots}
	}
	e.remain = e.nK
	e.left = e.candidateRunsLeft() + e.baselineRuns
	if err := e.runJobs(ctx, jobs, work, store); err != nil {
		return nil, err
	}
	e.effort.Stages = 1
	for {
		active := make([][]bool, nS)
		remaining := make([]bool, e.nK)
		for s := 0; s < nS; s++ {
			o := e.decide(s, false)
			active[s] = o.undecided
			for k, u := range o.undecided {
				remaining[k] = remaining[k] || u
			}
		}
		jobs = jobs[:0]
		capped := false
		for k := 0; k < e.nK; k++ {
			mn := e.minN(k)
			for c := 0; c < e.nC; c++ {
				n := len(e.samples[k][c])
				t := n
				if active[c][k] {
					t = max(t, n+e.batch)
				}
				if nS > e.nC && active[e.nC][k] {
					t = max(t, mn+e.batch)
				}
				if t > e.maxReps {
					if t > n {
						capped = true
					}
					t = e.maxReps
				}
				for r := n; r < t; r++ {
					jobs = append(jobs, job{k, c, r})
				}
			}
		}
		if capped {
			e.effort.BudgetExhausted = true
		}
		if len(jobs) == 0 {
			break
		}
		if e.maxUserSlots > 0 && e.effort.UserSlots+e.cost(jobs) > e.maxUserSlots {
			e.effort.BudgetExhausted = true
			break
		}
		e.stage++
		e.remain = 0
		for _, r := range remaining {
			if r {
				e.remain++
			}
		}
		e.left = e.candidateRunsLeft() + e.baselineRuns
		if err := e.runJobs(ctx, jobs, work, store); err != nil {
			return nil, err
		}
		e.effort.Stages++
	}
	e.effort.EqualAllocationReplications = e.nK * e.nC * e.effort.MaxReplicationsUsed
	e.left = e.budgetCap(e.baselineRuns)
	out := make([]scopeOutcome, nS)
	for s := 0; s < nS; s++ {
		out[s] = e.decide(s, true)
	}
	return out, nil
}
