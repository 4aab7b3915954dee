package loop

import (
	"fmt"
	"math"
	"sort"
	"strings"
	"sync"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// Estimate is a point estimate with its 95 % confidence interval. Within
// one replication the interval comes from batch means over time (Student t
// over the batches); with several replications, from the spread across
// replications (Student t over them). Proportions use the Wilson score
// interval with the effective sample size implied by that spread. When no
// spread is available (one batch, one replication) the interval collapses
// to the value.
type Estimate struct {
	Value  float64 `json:"value"`
	CILow  float64 `json:"ci_low"`
	CIHigh float64 `json:"ci_high"`
}

// Percentiles are the 1st, 5th, 50th, 95th and 99th percentiles, each with
// its confidence interval, from fixed-bin histograms interpolated within the
// bin (exact to one bin: at most 0.034 dB up to 512 users, see
// HistBinsPerOctaveLog2).
type Percentiles struct {
	P1  Estimate `json:"p1"`
	P5  Estimate `json:"p5"`
	P50 Estimate `json:"p50"`
	P95 Estimate `json:"p95"`
	P99 Estimate `json:"p99"`
}

// Figures are the power-control figures of a set of users over the
// measured slots (warm-up excluded). The SIR error is the true SIR minus the
// user's current target, in dB.
type Figures struct {
	SIRErrorMeanDB        Estimate    `json:"sir_error_mean_db"`        // mean SIR error, dB
	SIRErrorStdDB         Estimate    `json:"sir_error_std_db"`         // standard deviation of the SIR error, dB
	SIRErrorPercentilesDB Percentiles `json:"sir_error_percentiles_db"` // SIR error percentiles, dB
	OutageProbability     Estimate    `json:"outage_probability"`       // fraction of slots with SIR < target − outage margin
	AchievedBLER          Estimate    `json:"achieved_bler"`            // block errors / blocks (blocks drawn from the link curve)
	BLERTargetError       Estimate    `json:"bler_target_error"`        // achieved BLER − bler_target
	TxPowerMeanDBm        Estimate    `json:"tx_power_mean_dbm"`        // 10·log10 of the mean linear transmit power, dBm
	TxPowerPercentilesDBm Percentiles `json:"tx_power_percentiles_dbm"` // transmit power percentiles, dBm
	MaxPowerFraction      Estimate    `json:"max_power_fraction"`       // fraction of slots at max_power_dbm
	NoiseRiseMeanDB       Estimate    `json:"noise_rise_mean_db"`       // receiver noise rise (1+f)·ΣR + N over N, mean of dB (the receiver's, same for every set)
	NoiseRiseP95DB        Estimate    `json:"noise_rise_p95_db"`        // 95th percentile of the noise rise, dB
	ConvergenceTimeS      Estimate    `json:"convergence_time_s"`       // time from start until the 10 ms mean SIR error is first within ±1 dB (mean over users), s
	Users                 int         `json:"users"`                    // users in the set
	UserSlots             int64       `json:"user_slots"`               // user-slots measured (active, warm-up excluded), all replications
}

// UserFigures are one user's figures and placement.
type UserFigures struct {
	User       int     `json:"user"`
	Group      int     `json:"group"`
	DistanceM  float64 `json:"distance_m"`
	SpeedKmh   float64 `json:"speed_kmh"`
	DopplerHz  float64 `json:"doppler_hz"`
	PathLossDB float64 `json:"path_loss_db"`
	Figures    Figures `json:"figures"`
}

// DistanceBinFigures are the figures of the users in one distance bin
// (equal-width bins over the users' distance range; bin 0 nearest).
type DistanceBinFigures struct {
	Bin          int     `json:"bin"`
	MinDistanceM float64 `json:"min_distance_m"`
	MaxDistanceM float64 `json:"max_distance_m"`
	Figures      Figures `json:"figures"`
}

// Feasibility says whether every user can reach its target. The load is
// infeasible when the pole bound is reached — (1+f)·Σ_i a_i·γ_i/(G_p+γ_i)
// >= 1, with a_i the activity and γ_i the (initial or final) target: no
// powers at all give every user its target (the single-receiver form of
// ρ(F) >= 1, Foschini & Miljanic 1993) — or when users stay pinned at
// maximum power below target (at max power and in outage in at least half
// of the measured slots), or when the ideal mode's joint solution does not
// exist in more than 1 % of slots.
type Feasibility struct {
	Infeasible     bool    `json:"infeasible"`
	Reason         string  `json:"reason"`
	SpectralRadius float64 `json:"spectral_radius"` // ρ(F) of the link-gain matrix, when computed (static matrix runs)
	Users          []int   `json:"users"`           // users that cannot reach the target, when known
	LoadFactor     float64 `json:"load_factor"`     // (1+f)·Σ a_i·γ_i/(G_p+γ_i), the larger of initial and final targets
}

// UserTrace is one user's decimated trace (replication 0; inactive slots
// omitted).
type UserTrace struct {
	User          int       `json:"user"`
	Slots         []int64   `json:"slots"`
	SIRDB         []float32 `json:"sir_db"`          // true SIR, dB
	TargetDB      []float32 `json:"target_db"`       // SIR target, dB
	TxPowerDBm    []float32 `json:"tx_power_dbm"`    // transmit power, dBm
	ChannelGainDB []float32 `json:"channel_gain_db"` // channel power gain (path loss, shadowing, fading), dB
}

// Report is the result of Run: figures over all users, per user and per
// distance bin, each with a 95 % confidence interval; feasibility; traces;
// and what reproduces it exactly (the normalised scenario, the seed, the
// engine version). Everything but WallTimeS and UserSlotsPerS is a
// deterministic function of (scenario, seed, EngineVersion).
type Report struct {
	Aggregate          Figures              `json:"aggregate"`
	Users              []UserFigures        `json:"users"`
	DistanceBins       []DistanceBinFigures `json:"distance_bins"`
	Feasibility        Feasibility          `json:"feasibility"`
	NormalisedScenario Scenario             `json:"normalised_scenario"`
	Seed               uint64               `json:"seed"`
	EngineVersion      string               `json:"engine_version"`
	Replications       int                  `json:"replications"`
	Slots              int64                `json:"slots"`                // measured slots per replication (warm-up excluded)
	SimulatedUserSlots int64                `json:"simulated_user_slots"` // warm-up included, all replications
	WallTimeS          float64              `json:"wall_time_s"`
	UserSlotsPerS      float64              `json:"user_slots_per_s"`
	Traces             []UserTrace          `json:"traces"`
	Notes              []string             `json:"notes"`         // caveats of this run (e.g. values beyond the histogram range)
	GroupFingers       []GroupFingers       `json:"group_fingers"` // per group: taps, paths resolvable at the chip rate, fingers combined
	Layout             *LayoutReport        `json:"layout"`        // multi-cell figures (layout.sites set), else nil
}

// tQuantile is the two-sided 95 % Student t quantile with dof degrees of
// freedom (gonum distuv).
func tQuantile(dof int) float64 {
	if dof <= 0 {
		return 0
	}
	tqMu.Lock()
	defer tqMu.Unlock()
	if q, ok := tqCache[dof]; ok {
		return q
	}
	q := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(dof)}.Quantile(0.975)
	if len(tqCache) < 4096 {
		tqCache[dof] = q
	}
	return q
}

var (
	tqMu    sync.Mutex
	tqCache = map[int]float64{}
)

const z95 = 1.959963984540054

// wilson is the Wilson score interval of a proportion p with n samples.
func wilson(p, n float64) (lo, hi float64) {
	if !(n > 0) {
		return p, p
	}
	z2 := z95 * z95
	den := 1 + z2/n
	c := (p + z2/(2*n)) / den
	h := z95 * math.Sqrt(p*(1-p)/n+z2/(4*n*n)) / den
	return math.Max(0, c-h), math.Min(1, c+h)
}

// combined is one statistic over replications: value, standard error and
// its degrees of freedom.
type combined struct {
	v, se float64
	dof   int
	ok    bool
}

func combine(vals []float64, ses []float64, dofs []int) combined {
	R := len(vals)
	if R == 0 {
		return combined{}
	}
	if R == 1 {
		return combined{v: vals[0], se: ses[0], dof: dofs[0], ok: true}
	}
	m := 0.0
	for _, x := range vals {
		m += x
	}
	m /= float64(R)
	v := 0.0
	for _, x := range vals {
		v += (x - m) * (x - m)
	}
	v /= float64(R - 1)
	return combined{v: m, se: math.Sqrt(v / float64(R)), dof: R - 1, ok: true}
}

func (c combined) estimate() Estimate {
	h := tQuantile(c.dof) * c.se
	if c.dof == 0 || !(h >= 0) {
		h = 0
	}
	return Estimate{Value: c.v, CILow: c.v - h, CIHigh: c.v + h}
}

// proportion is the Wilson interval with n_eff = p(1−p)/se², capped at the
// sample count.
func (c combined) proportion(samples float64) Estimate {
	nEff := samples
	if c.se > 0 && c.v > 0 && c.v < 1 {
		nEff = math.Min(samples, c.v*(1-c.v)/(c.se*c.se))
	}
	lo, hi := wilson(c.v, nEff)
	return Estimate{Value: c.v, CILow: lo, CIHigh: hi}
}

// figures combines set i of every replication.
func (sh *shared) figures(results []*repResult, i int) Figures {
	R := len(results)
	vals, ses := make([]float64, 0, R), make([]float64, 0, R)
	dofs := make([]int, 0, R)
	stat := func(st int) combined {
		vals, ses, dofs = vals[:0], ses[:0], dofs[:0]
		for _, r := range results {
			s := &r.sets[i]
			if s.ok[st] {
				vals = append(vals, s.val[st])
				ses = append(ses, s.se[st])
				dofs = append(dofs, s.dof[st])
			}
		}
		return combine(vals, ses, dofs)
	}
	var f Figures
	var slots, blocks int64
	for _, r := range results {
		slots += r.sets[i].slots
		blocks += r.sets[i].blocks
	}
	f.Users = results[0].sets[i].users
	f.UserSlots = slots
	f.SIRErrorMeanDB = stat(stSIRMean).estimate()
	f.SIRErrorStdDB = stat(stSIRStd).estimate()
	f.SIRErrorPercentilesDB = percentiles(stat, stSIRQ)
	f.TxPowerPercentilesDBm = percentiles(stat, stPowQ)
	f.OutageProbability = stat(stOutage).proportion(float64(slots))
	b := stat(stBLER)
	f.AchievedBLER = b.proportion(float64(blocks))
	tau := sh.sc.OuterLoop.BLERTarget
	f.BLERTargetError = Estimate{f.AchievedBLER.Value - tau, f.AchievedBLER.CILow - tau, f.AchievedBLER.CIHigh - tau}
	f.TxPowerMeanDBm = stat(stPowMean).estimate()
	f.MaxPowerFraction = stat(stMaxFrac).proportion(float64(slots))
	// Noise rise: the receiver's.
	var nm, np, nmSE, npSE []float64
	var nd []int
	for _, r := range results {
		nm, np = append(nm, r.nrMean), append(np, r.nrP95)
		nmSE, npSE = append(nmSE, r.nrSE[0]), append(npSE, r.nrSE[1])
		nd = append(nd, r.nrDof)
	}
	f.NoiseRiseMeanDB = combine(nm, nmSE, nd).estimate()
	f.NoiseRiseP95DB = combine(np, npSE, nd).estimate()
	// Convergence: across replications for a user, across users for a set.
	var cv []float64
	if i < sh.n {
		for _, r := range results {
			cv = append(cv, r.conv[i])
		}
	} else {
		for u := 0; u < sh.n; u++ {
			if i == len(results[0].sets)-1 || sh.users[u].bin == i-sh.n {
				m := 0.0
				for _, r := range results {
					m += r.conv[u]
				}
				cv = append(cv, m/float64(R))
			}
		}
	}
	if len(cv) > 0 {
		zero := make([]float64, len(cv))
		dz := make([]int, len(cv))
		if len(cv) == 1 {
			f.ConvergenceTimeS = combine(cv, zero[:1], dz[:1]).estimate()
		} else {
			f.ConvergenceTimeS = combine(cv, zero, dz).estimate()
		}
	}
	return f
}

func percentiles(stat func(int) combined, base int) Percentiles {
	return Percentiles{
		P1: stat(base).estimate(), P5: stat(base + 1).estimate(), P50: stat(base + 2).estimate(),
		P95: stat(base + 3).estimate(), P99: stat(base + 4).estimate(),
	}
}

// report assembles the Report from the replications, in replication order.
func (sh *shared) report(results []*repResult) *Report {
	sc := sh.sc
	n := sh.n
	rep := &Report{
		NormalisedScenario: sc,
		Seed:               sc.Run.Seed,
		EngineVersion:      EngineVersion,
		Replications:       len(results),
		Slots:              sh.total - sh.warm,
		SimulatedUserSlots: int64(n) * sh.total * int64(len(results)),
		Users:              []UserFigures{},
		DistanceBins:       []DistanceBinFigures{},
		Traces:             []UserTrace{},
		Notes:              []string{},
		GroupFingers:       groupFingers(sc),
	}
	for u := 0; u < n; u++ {
		ui := sh.users[u]
		rep.Users = append(rep.Users, UserFigures{User: u, Group: ui.group, DistanceM: ui.distanceM, SpeedKmh: ui.speedKmh,
			DopplerHz: ui.dopplerHz, PathLossDB: ui.pathLossDB, Figures: sh.figures(results, u)})
	}
	for b := 0; b < sh.nbins; b++ {
		rep.DistanceBins = append(rep.DistanceBins, DistanceBinFigures{Bin: b, MinDistanceM: sh.binEdges[b],
			MaxDistanceM: sh.binEdges[b+1], Figures: sh.figures(results, n+b)})
	}
	rep.Aggregate = sh.figures(results, n+sh.nbins)
	if results[0].traces != nil {
		rep.Traces = results[0].traces
		if results[0].traceCut {
			rep.Notes = append(rep.Notes, fmt.Sprintf("traces cut at %d samples per user (raise the decimation)", MaxTracePoints))
		}
	}
	rep.Feasibility = sh.feasibility(results, rep)
	var uo int64
	for _, r := range results {
		uo += r.underOver
	}
	if uo > 0 {
		rep.Notes = append(rep.Notes, fmt.Sprintf("%d user-slots had an SIR error beyond ±48 dB; percentiles there are clamped to the range", uo))
	}
	notConv := 0
	for u := 0; u < n; u++ {
		for _, r := range results {
			if !r.converged[u] {
				notConv++
				break
			}
		}
	}
	if notConv > 0 {
		rep.Notes = append(rep.Notes, fmt.Sprintf("%d users never converged (SIR error within ±%g dB over %g s); their convergence time is the run length", notConv, ConvergenceToleranceDB, ConvergenceWindowS))
	}
	return rep
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
