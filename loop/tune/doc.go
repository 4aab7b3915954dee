// Package tune searches power-control settings: grids over scenario fields,
// objectives, paired comparisons under common random numbers, sequential
// allocation of replications, recommendations and capacity search.
//
// # Grid
//
// An Axis names a numeric scenario field by its json-tag path (the proto
// field path, e.g. "inner_loop.step_db", "groups[0].speeds[0].speed_kmh")
// with a list of values or a range and a count; a Grid is the Cartesian
// product of its axes in a stable row-major order (last axis fastest), and a
// Point is applied to a copy of the base scenario with loop.SetPath. The
// Sweep RPC uses the same machinery (PlanSweep, Sweep), and Sweep, Tune and
// Capacity run on one worker pool (pool.go). A Condition is a weighted set of
// Overrides (numbers through loop.SetPath, strings and enums such as
// "groups[0].profile" or "inner_loop.mode" through loop.SetTextPath).
//
// # Procedure (Tune)
//
// Every candidate k (grid point) is run under every condition c in
// independent replications r of one run each; replication r under condition
// c has seed ReplicationSeed(base seed, c, r) for every candidate, so all
// candidates see the same fading, placement and error draws (common random
// numbers) and every comparison is paired: d_r = x_{k,r} − x_{best,r},
// interval mean(d) ± t_{n−1,(1+conf)/2}·s_d/√n over the n common
// replications.
//
//  1. Round 0 runs Budget.MinReplications of everything.
//  2. After each round, in each condition and across conditions (the
//     weighted mean of the per-condition figure, replication by
//     replication), the leader is the candidate with the best point
//     estimate. Another candidate is dropped when its paired interval
//     against the leader lies entirely above zero at the Bonferroni-adjusted
//     level 1 − (1−conf)/(K−1) (K candidates), counted as equivalent when
//     the interval lies inside ±Objective.IndifferenceZone, and otherwise
//     stays in contention.
//  3. Candidates in contention (and their leader) get
//     Budget.BatchReplications more replications; the procedure stops when
//     nothing is in contention, MaxReplications is reached, or the next
//     round would exceed MaxUserSlots.
//  4. The verdict is taken at the stated confidence: the tie set is the
//     leader plus every surviving candidate whose paired interval against
//     the leader reaches zero. Decision.Verdict is VerdictWinner with a tie
//     set of one, VerdictTie otherwise (the setting picked by TieRule:
//     smaller step, then lower update rate, ...; Decision.TieBreak names
//     the key used), VerdictConstraintsUnmet when no candidate meets the
//     constraints (then there is no tie set and no tie rule: the candidate
//     with the smallest mean worst excess is recommended, single- and
//     multi-cell alike), VerdictSingle with one candidate. From then on the
//     recommended candidate (Decision.Best) is the reference of everything
//     reported: Decision.Ordering starts with it, the runner-up is
//     Ordering[1], and every DiffToBest is relative to it.
//
// Constraints apply to every objective (Objective.OutageLimit,
// NoiseRiseLimitDB, BLERTolerance): a candidate is feasible when its point
// estimates meet them; infeasible candidates rank after feasible ones, are
// dropped once an interval lies entirely outside a constraint, and
// comparisons drop others only against a leader whose intervals lie inside
// the constraints. When nothing is feasible the candidates are ranked by
// their worst relative constraint excess (Objective.Excess), the verdict
// says so first and Decision.Misses lists by how much the closest
// candidate misses each constraint. A recommended setting with outage above
// Objective.OutageWarning (default 10 %) carries a warning.
//
// The text every client prints comes from here: Decision.Headline,
// RunnerUpLine, Warnings and Reason, Recommendation.Lines, and the
// FigureLabel (name, unit, difference unit, display scale) of every
// figure, so that no output invents a unit or names a different best.
//
// Each condition also gets a fixed-power baseline (inner_loop.mode
// FIXED_POWER) on the recommended candidate's seeds, and the Recommendation
// reports the effort spent against the equal-allocation alternative.
//
// # Multi-cell scenarios
//
// Every run goes through multicell.RunScenario: a base scenario with a
// layout (layout.sites set) runs on the multi-cell engine and is scored on
// its layout-wide figures; axes and overrides may name layout fields
// (layout.handover.window_db, …). Such a tune has no fixed-power baseline,
// and a capacity search counts users per cell.
//
// # Capacity
//
// Capacity bisects the count of one group for the largest count whose mean
// outage is at or below a limit, whose mean noise rise is at or below a
// ceiling (DefaultNoiseRiseLimitDB, 6 dB: a load of 75 %) and whose load no
// replication flagged infeasible, with the same replication seeds at every
// count (common random numbers), and reports PoleCapacity (Gilhousen et al.,
// IEEE Trans. Veh. Technol. 40(2), 1991) beside it.
//
// # Plans and progress
//
// PlanSweep, PlanTune and PlanCapacity check a request and bound its work
// (Cost) without running it; a service admits the plan and runs it (Sweep,
// TunePlan.Run, CapacityPlan.Run), so each request is checked once. Tune
// and Capacity report Progress after every run, with FractionDone: the
// runs done over the most the search can still take, never decreasing and
// exactly 1 in the last report.
//
// Everything is deterministic in the request: results are identical
// whatever GOMAXPROCS or Options.Parallelism is (runs write to fixed slots
// and are merged in index order).
package tune
