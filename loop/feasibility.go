package loop

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"gonum.org/v1/gonum/mat"
)

// MaxListedUsers is the most user indices Feasibility.Users lists; the
// reason then gives the count and the index and distance ranges of all.
const MaxListedUsers = 64

// summariseUsers describes a sorted list of user indices by count, index
// range and distance range, e.g. "3989 users, indices 11..3999, 312..1000 m".
func (sh *shared) summariseUsers(idx []int) string {
	if len(idx) == 0 {
		return "no users"
	}
	dmin, dmax := math.Inf(1), math.Inf(-1)
	for _, u := range idx {
		dmin, dmax = math.Min(dmin, sh.users[u].distanceM), math.Max(dmax, sh.users[u].distanceM)
	}
	if len(idx) == 1 {
		return fmt.Sprintf("1 user, index %d, at %.6g m", idx[0], dmin)
	}
	return fmt.Sprintf("%d users, indices %d..%d, %.6g..%.6g m", len(idx), idx[0], idx[len(idx)-1], dmin, dmax)
}

// lowestTargetDB is the lowest SIR target user u can have during the run:
// min_target_db with the outer loop on, the fixed target otherwise.
func (sh *shared) lowestTargetDB(int) float64 {
	if ol := sh.sc.OuterLoop; ol.Enabled {
		return math.Min(ol.MinTargetDB, ol.InitialTargetDB)
	}
	return sh.sc.OuterLoop.InitialTargetDB
}

// preRunFeasibility checks, before any slot is simulated and in time
// linear in the users, whether the scenario's own interference equation
// can carry its load: at the lowest targets the run can use, the pole
// bound (1+f)·Σ_i a_i·γ_i/(G_p+γ_i) >= 1 means no powers give every user
// its target (the single-receiver form of ρ(F) >= 1; Foschini & Miljanic,
// IEEE Trans. Veh. Technol. 42(4), 1993). ok is false when the load cannot
// be carried; fz then says why. Test hooks with a link-gain matrix are
// checked after the run (spectral radius).
func (sh *shared) preRunFeasibility() (fz Feasibility, ok bool) {
	if sh.hk != nil && sh.hk.matrix != nil {
		return Feasibility{}, true
	}
	fz.LoadFactor = sh.loadFactor(sh.lowestTargetDB)
	if fz.LoadFactor < 1 {
		return Feasibility{}, true
	}
	all := make([]int, sh.n)
	for i := range all {
		all[i] = i
	}
	what := fmt.Sprintf("the fixed target %g dB", sh.sc.OuterLoop.InitialTargetDB)
	if sh.sc.OuterLoop.Enabled {
		what = fmt.Sprintf("the lowest target the outer loop can set, %g dB", sh.lowestTargetDB(0))
	}
	fz.Infeasible = true
	fz.Users = []int{}
	fz.Reason = fmt.Sprintf("not simulated: pole capacity exceeded: load factor (1+f)·Σ a·γ/(G_p+γ) = %.4g >= 1 at %s, so no powers give every user its target (%s); reduce the users, their activity or the target",
		fz.LoadFactor, what, sh.summariseUsers(all))
	return fz, false
}

// loadFactor is (1+f)·Σ_i a_i·γ_i/(G_p+γ_i) for targets in dB.
func (sh *shared) loadFactor(targetDB func(u int) float64) float64 {
	s := 0.0
	for u := 0; u < sh.n; u++ {
		g := dbToLin(targetDB(u))
		a := sh.sc.Groups[sh.users[u].group].ActivityFactor
		s += a * g / (sh.gp + g)
	}
	return sh.f1 * s
}

func (sh *shared) feasibility(results []*repResult, rep *Report) Feasibility {
	var fz Feasibility
	var reasons []string
	mode := sh.sc.InnerLoop.Mode
	if sh.hk != nil && sh.hk.matrix != nil {
		fz.SpectralRadius = spectralRadius(sh.hk.matrix, dbToLin(sh.sc.OuterLoop.InitialTargetDB))
		if fz.SpectralRadius >= 1 {
			reasons = append(reasons, fmt.Sprintf("spectral radius of the normalised link-gain matrix at the target is %.4g >= 1: no powers reach the target (Foschini & Miljanic 1993)", fz.SpectralRadius))
		}
	} else {
		l0 := sh.loadFactor(func(int) float64 { return sh.sc.OuterLoop.InitialTargetDB })
		l1 := sh.loadFactor(func(u int) float64 { return results[0].targetDB[u] })
		fz.LoadFactor = math.Max(l0, l1)
		if fz.LoadFactor >= 1 {
			reasons = append(reasons, fmt.Sprintf("pole capacity exceeded: load factor (1+f)·Σ a·γ/(G_p+γ) = %.4g >= 1, no powers give every user its target", fz.LoadFactor))
		}
	}
	if mode == InnerModeClosedLoop || mode == InnerModeIdeal {
		for _, u := range rep.Users {
			if u.Figures.MaxPowerFraction.Value >= 0.5 && u.Figures.OutageProbability.Value >= 0.5 {
				fz.Users = append(fz.Users, u.User)
			}
		}
		if len(fz.Users) > 0 {
			reasons = append(reasons, fmt.Sprintf("%d users are pinned at max_power_dbm below target (at maximum power and in outage in >= 50 %% of slots)", len(fz.Users)))
		}
	}
	if mode == InnerModeIdeal {
		var bad int64
		for _, r := range results {
			bad += r.idealBad
		}
		if fr := float64(bad) / float64(sh.total*int64(len(results))); fr > 0.01 {
			reasons = append(reasons, fmt.Sprintf("the ideal joint power solution does not exist in %.3g %% of slots", 100*fr))
		}
	}
	sort.Ints(fz.Users)
	if len(fz.Users) > 0 {
		reasons = append(reasons, "pinned: "+sh.summariseUsers(fz.Users))
	}
	if len(fz.Users) > MaxListedUsers {
		fz.Users = fz.Users[:MaxListedUsers]
	}
	if fz.Users == nil {
		fz.Users = []int{}
	}
	fz.Infeasible = len(reasons) > 0
	fz.Reason = strings.Join(reasons, "; ")
	return fz
}

// spectralRadius is ρ(F) with F_ij = γ·G_ij/G_ii for j ≠ i, 0 on the
// diagonal (gonum mat eigenvalues).
func spectralRadius(G [][]float64, gamma float64) float64 {
	n := len(G)
	F := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			if i != j {
				F.Set(i, j, gamma*G[i][j]/G[i][i])
			}
		}
	}
	var e mat.Eigen
	if !e.Factorize(F, mat.EigenNone) {
		return math.NaN()
	}
	r := 0.0
	for _, v := range e.Values(nil) {
		r = math.Max(r, math.Hypot(real(v), imag(v)))
	}
	return r
}
