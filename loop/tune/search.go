package tune

import (
	"context"
	"fmt"
	"math"
)

// This file is the round loop of the sequential procedure (the engine):
// progress, effort, budget and the rounds of replications on the pool.

// runFunc evaluates replication r of candidate k under condition c. Every
// candidate under one condition gets the same seed for replication r
// (common random numbers).
type runFunc func(ctx context.Context, k, c, r int) (Sample, error)

// SearchProgress is reported while a search runs (fadeloop.v1.SearchProgress).
type SearchProgress struct {
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
	progress     func(SearchProgress)
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
	e.progress(SearchProgress{Stage: e.stage, CandidatesRemaining: e.remain, ReplicationsDone: e.progDone,
		UserSlotsDone: e.progWork, FractionDone: f})
}

// candidateRunsLeft is the most candidate runs the sequential procedure can
// still start: MaxReplications less the replications so far of every
// (candidate, condition) that is not dropped for good (dropped in its
// condition and, with several conditions, across conditions too).
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
	return left
}

// budgetCap bounds n runs by what the budget left buys at the cheapest run
// (candidates and baseline share the budget).
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
	e.left = e.budgetCap(e.candidateRunsLeft() + e.baselineRuns)
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
		e.left = e.budgetCap(e.candidateRunsLeft() + e.baselineRuns)
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
