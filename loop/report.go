package loop

import (
	"encoding/json"
	"fmt"
	"math"
	"time"
)

// Estimate is a point estimate with its 95 % confidence interval, always
// inside the quantity's range. With one replication the interval comes
// from batch means over time (batches spanning >= BatchDecorrelationTimes
// decorrelation times, see effectiveBatches); with several replications the
// value is pooled over all replications' samples and the interval comes
// from the spread of the per-replication values. Means and percentiles use
// Student t over the batches or replications (Student 1908), clamped to the
// quantity's physical range (Tx power within [min, max] dBm, noise rise
// >= 0 dB); proportions use the Wilson score interval (Wilson 1927) on the
// effective sample size p(1−p)/se² with the t quantile in place of z
// (Korn & Graubard 1998, memory), capped at the number of decorrelation
// times observed; the SIR-error std and the convergence time, which are
// positive, use Student t on the log scale (delta method: half-width
// t·se/value), so their intervals never go below zero. When no spread is
// available (one batch and one replication) the interval collapses to the
// value. With one replication too short for MinBatches batches of
// BatchDecorrelationTimes decorrelation times, every interval built on
// batch means is withheld: CILow and CIHigh are NaN, Value is kept, and
// the report's notes give the measured slots needed (effectiveBatches).
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
// exist in more than 1 % of slots. The pole bound at the lowest targets the
// run can use (the fixed target, or min_target_db with the outer loop) is
// checked before any slot is simulated: such a run returns at once with no
// figures (SimulatedUserSlots = 0, no users or bins). Users lists at most
// MaxListedUsers indices; Reason gives the count and the index and
// distance ranges of all of them.
type Feasibility struct {
	Infeasible     bool    `json:"infeasible"`
	Reason         string  `json:"reason"`
	SpectralRadius float64 `json:"spectral_radius"` // ρ(F) of the link-gain matrix, when computed (static matrix runs)
	Users          []int   `json:"users"`           // users that cannot reach the target, when known (at most MaxListedUsers, sorted)
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

// pooledValues are the point values of set i over all replications (pool):
// percentiles, mean and std from the pooled histograms, proportions and
// the mean power from the summed counts (in replication order).
func (sh *shared) pooledValues(results []*repResult, i int) [nStat]float64 {
	var cnt, out, mx, blk, errs int64
	var psum float64
	for _, r := range results {
		s := &r.sets[i]
		cnt, out, mx, blk, errs, psum = cnt+s.slots, out+s.outage, mx+s.atMax, blk+s.blocks, errs+s.blockErrs, psum+s.powSumMW
	}
	var hsS, hsP histStats
	sh.pool.sir[i].stats(sh.sirLayout, &hsS)
	sh.pool.pow[i].stats(sh.powLayout, &hsP)
	return pointValues(&hsS, &hsP, cnt, out, mx, blk, errs, psum)
}

// figures combines set i of every replication.
func (sh *shared) figures(results []*repResult, i int) Figures {
	R := len(results)
	vals, ses := make([]float64, 0, R), make([]float64, 0, R)
	dofs := make([]int, 0, R)
	var pooled [nStat]float64
	if sh.pool != nil {
		pooled = sh.pooledValues(results, i)
	}
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
		c := combine(vals, ses, dofs)
		if sh.pool != nil && c.ok {
			c.v = pooled[st]
		}
		return c
	}
	var f Figures
	var slots, blocks int64
	for _, r := range results {
		slots += r.sets[i].slots
		blocks += r.sets[i].blocks
	}
	il := sh.sc.InnerLoop
	f.Users = results[0].sets[i].users
	f.UserSlots = slots
	f.SIRErrorMeanDB = stat(stSIRMean).estimate()
	f.SIRErrorStdDB = stat(stSIRStd).positive()
	f.SIRErrorPercentilesDB = percentiles(stat, stSIRQ, math.Inf(-1), math.Inf(1))
	f.TxPowerPercentilesDBm = percentiles(stat, stPowQ, il.MinPowerDBm, il.MaxPowerDBm)
	f.OutageProbability = stat(stOutage).proportion(float64(slots), sh.independentSamples(slots, 1, f.Users, R))
	f.AchievedBLER = stat(stBLER).proportion(float64(blocks), sh.independentSamples(blocks, float64(sh.sc.OuterLoop.BlockSlots), f.Users, R))
	tau := sh.sc.OuterLoop.BLERTarget
	f.BLERTargetError = Estimate{f.AchievedBLER.Value - tau, f.AchievedBLER.CILow - tau, f.AchievedBLER.CIHigh - tau}
	f.TxPowerMeanDBm = stat(stPowMean).within(il.MinPowerDBm, il.MaxPowerDBm)
	f.MaxPowerFraction = stat(stMaxFrac).proportion(float64(slots), sh.independentSamples(slots, 1, f.Users, R))
	// Noise rise: the receiver's, >= 0 dB.
	var nm, np, nmSE, npSE []float64
	var nd []int
	for _, r := range results {
		nm, np = append(nm, r.nrMean), append(np, r.nrP95)
		nmSE, npSE = append(nmSE, r.nrSE[0]), append(npSE, r.nrSE[1])
		nd = append(nd, r.nrDof)
	}
	cm, cp := combine(nm, nmSE, nd), combine(np, npSE, nd)
	if sh.pool != nil {
		var hn histStats
		sh.pool.rise.stats(sh.riseLayout, &hn)
		cm.v, cp.v = hn.mean, hn.q[3]
	}
	f.NoiseRiseMeanDB = cm.within(0, math.Inf(1))
	f.NoiseRiseP95DB = cp.within(0, math.Inf(1))
	// Convergence: across replications for a user, across users for a set
	// (each user's time averaged over the replications); positive.
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
		f.ConvergenceTimeS = combine(cv, zero, dz).positive()
		if i < sh.n && R == 1 {
			// One user, one replication: one observed time, no spread to
			// give an interval from (it was [v, v], a width that holds
			// nothing).
			f.ConvergenceTimeS.withhold()
		}
	}
	if R == 1 && sh.withhold {
		f.withholdBatchIntervals()
	}
	return f
}

// withholdBatchIntervals gives NaN bounds (values kept) to every estimate
// whose interval, with one replication, comes from the run's batch means:
// all but the convergence time, whose interval is over users (a set; one
// user's is withheld with one replication), never over batches.
func (f *Figures) withholdBatchIntervals() {
	for _, e := range []*Estimate{&f.SIRErrorMeanDB, &f.SIRErrorStdDB, &f.OutageProbability, &f.AchievedBLER,
		&f.BLERTargetError, &f.TxPowerMeanDBm, &f.MaxPowerFraction, &f.NoiseRiseMeanDB, &f.NoiseRiseP95DB} {
		e.withhold()
	}
	for _, p := range []*Percentiles{&f.SIRErrorPercentilesDB, &f.TxPowerPercentilesDBm} {
		for _, e := range []*Estimate{&p.P1, &p.P5, &p.P50, &p.P95, &p.P99} {
			e.withhold()
		}
	}
}

// withhold keeps the value and drops the interval (NaN bounds).
func (e *Estimate) withhold() { *e = Withheld(e.Value) }

// Withheld is value v without an interval: CILow and CIHigh NaN, the form
// both engines give a figure whose interval would not hold its 95 % (one
// replication too short for its batches); every consumer prints the
// value alone, JSON has null bounds.
func Withheld(v float64) Estimate {
	return Estimate{Value: v, CILow: math.NaN(), CIHigh: math.NaN()}
}

// jsonFloat is a float64 whose JSON form is null when it is NaN (JSON has
// no NaN); null decodes to NaN.
type jsonFloat float64

func (f jsonFloat) MarshalJSON() ([]byte, error) {
	if math.IsNaN(float64(f)) {
		return []byte("null"), nil
	}
	return json.Marshal(float64(f))
}

func (f *jsonFloat) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*f = jsonFloat(math.NaN())
		return nil
	}
	return json.Unmarshal(b, (*float64)(f))
}

type estimateJSON struct {
	Value  jsonFloat `json:"value"`
	CILow  jsonFloat `json:"ci_low"`
	CIHigh jsonFloat `json:"ci_high"`
}

// MarshalJSON writes {"value", "ci_low", "ci_high"}, a NaN (an interval
// withheld, or a value not available) as null.
func (e Estimate) MarshalJSON() ([]byte, error) {
	return json.Marshal(estimateJSON{jsonFloat(e.Value), jsonFloat(e.CILow), jsonFloat(e.CIHigh)})
}

// UnmarshalJSON reads the form of MarshalJSON (null as NaN; a missing
// field keeps its value).
func (e *Estimate) UnmarshalJSON(b []byte) error {
	x := estimateJSON{jsonFloat(e.Value), jsonFloat(e.CILow), jsonFloat(e.CIHigh)}
	if err := json.Unmarshal(b, &x); err != nil {
		return err
	}
	e.Value, e.CILow, e.CIHigh = float64(x.Value), float64(x.CILow), float64(x.CIHigh)
	return nil
}

func percentiles(stat func(int) combined, base int, lo, hi float64) Percentiles {
	return Percentiles{
		P1: stat(base).within(lo, hi), P5: stat(base+1).within(lo, hi), P50: stat(base+2).within(lo, hi),
		P95: stat(base+3).within(lo, hi), P99: stat(base+4).within(lo, hi),
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
	if sh.batchNote != "" && len(results) == 1 {
		rep.Notes = append(rep.Notes, sh.batchNote)
	}
	if results[0].traces != nil {
		rep.Traces = results[0].traces
		if results[0].traceCut {
			rep.Notes = append(rep.Notes, fmt.Sprintf("traces cut at %d samples per user (raise the decimation)", MaxTracePoints))
		}
	}
	rep.Feasibility = sh.feasibility(results, rep)
	if note := sh.sc.OuterLoop.WarmupNote(sh.warm); note != "" {
		rep.Notes = append(rep.Notes, note)
	}
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

// infeasibleReport is the Report of a run found infeasible before any slot
// was simulated: no figures (zero, no users or bins), the feasibility
// verdict, the user count (Aggregate.Users) and what reproduces it.
func (sh *shared) infeasibleReport(fz Feasibility, start time.Time) *Report {
	rep := &Report{
		NormalisedScenario: sh.sc,
		Seed:               sh.sc.Run.Seed,
		EngineVersion:      EngineVersion,
		Replications:       sh.sc.Run.Replications,
		Users:              []UserFigures{},
		DistanceBins:       []DistanceBinFigures{},
		Traces:             []UserTrace{},
		Feasibility:        fz,
		Notes:              []string{"infeasible load found before the run: no slots simulated, no figures"},
	}
	rep.Aggregate.Users = sh.n
	rep.WallTimeS = time.Since(start).Seconds()
	return rep
}
