package tune

import (
	"math"
	"sort"
)

// This file holds the decision rules of the sequential procedure: the
// constraint status of a candidate, the ranking, dropping and tie set of a
// scope, and the tie rule.

// TieRule is the documented order in which a tie set is broken: the first
// candidate in this order wins.
const TieRule = "smaller inner_loop.step_db, then lower inner_loop.update_rate_hz, " +
	"then smaller outer_loop.up_step_db, then longer inner_loop.feedback_delay_slots, " +
	"then smaller values of the other axes in axis order, then grid order"

// tiePriority is TieRule's list of keys: the field, whether the smaller
// value goes first, and the word for that side.
var tiePriority = []struct {
	path string
	asc  bool
	word string
}{
	{StepPath, true, "smaller"},
	{RatePath, true, "lower"},
	{"outer_loop.up_step_db", true, "smaller"},
	{"inner_loop.feedback_delay_slots", false, "longer"},
}

// tieOrder compares grid points a and b by TieRule: less says a comes
// first, key names the rule that decides, e.g. "smaller
// inner_loop.step_db" ("grid order" when only the index does).
func tieOrder(a, b Point) (less bool, key string) {
	for _, tp := range tiePriority {
		va, oka := a.Value(tp.path)
		vb, okb := b.Value(tp.path)
		if !oka || !okb || va == vb {
			continue
		}
		return (va < vb) == tp.asc, tp.word + " " + tp.path
	}
	for i := range a.Coords {
		if a.Coords[i].Value != b.Coords[i].Value {
			return a.Coords[i].Value < b.Coords[i].Value, "smaller " + a.Coords[i].Path
		}
	}
	return a.Index < b.Index, "grid order"
}

func decision(o scopeOutcome, pts []Point, obj Objective) Decision {
	d := Decision{
		Best:             o.chosen,
		Setting:          pts[o.chosen],
		Ordering:         append([]int(nil), o.ordering...),
		RankedBy:         obj.Figure(),
		Declared:         o.declared,
		TieSet:           append([]int(nil), o.tieSet...),
		Leader:           o.best,
		RunnerUp:         o.runnerUp,
		Evidence:         o.evidence,
		ConstraintsUnmet: o.fallback,
	}
	if o.fallback {
		d.RankedBy = FigureLabelOf(FigureConstraintExcess)
	}
	switch {
	case o.fallback:
		d.Verdict = VerdictConstraintsUnmet
	case len(pts) == 1:
		d.Verdict = VerdictSingle
	case len(o.tieSet) > 1:
		d.Verdict = VerdictTie
	default:
		d.Verdict = VerdictWinner
	}
	d.Declared = d.Verdict == VerdictWinner
	if len(o.tieSet) > 1 {
		other := o.best
		if other == o.chosen {
			for _, k := range o.tieSet {
				if k != o.chosen {
					other = k
					break
				}
			}
		}
		_, d.TieBreak = tieOrder(pts[o.chosen], pts[other])
	}
	return d
}

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
	// against the best reaches down to zero. When no candidate meets the
	// constraints there is no tie set: the closest candidate (smallest mean
	// worst excess) is the recommendation whatever the intervals say, since
	// TieRule prefers settings for their loop behaviour, not for being
	// nearer the limits, and would otherwise put a farther candidate first
	// (the runner-up's interval tells whether the two are separated).
	o.tieSet = []int{best}
	ru := -1
	for _, k := range alive {
		if k == best || class[k] != class[best] {
			continue
		}
		if o.diff[k].Low <= 0 && !o.fallback {
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
