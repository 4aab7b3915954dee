package multicell

import (
	"math"

	"github.com/fadeloop/fadeloop/loop"
	"gonum.org/v1/gonum/stat/distuv"
)

// Report is a multi-cell run's result. Ratios and noise rise are measured,
// not assumed: other_to_own is the ratio of the mean interference a cell
// receives from users served by other cells to that from its own users
// (the "f" of pole-capacity formulas), with a user served by the best cell
// of its active set.
//
// Intervals (95 %): with one replication, Student t over batch means in
// time, conditional on the drop; with several, Student t over the
// replications (independent drops). Proportions use the Wilson interval on
// the effective sample size implied by that spread, inside [0, 1].
type Report struct {
	Config             Config         `json:"config"` // normalised
	Users              int            `json:"users"`
	MeasuredSlots      int64          `json:"measured_slots"` // per replication, warm-up excluded
	SimulatedUserSlots int64          `json:"simulated_user_slots"`
	Overall            OverallFigures `json:"overall"`
	Cells              []CellFigures  `json:"cells"`
	UserPoints         []UserPoint    `json:"user_points"` // replication 0's drop, for maps
}

// LegStates are the handover states reported separately: one, two, and
// three or more cells in the active set.
const LegStates = 3

// OverallFigures are the layout-wide figures.
type OverallFigures struct {
	OtherToOwn          loop.Estimate            `json:"other_to_own"`           // Σ other-cell / Σ own-cell interference over every cell, linear
	NoiseRiseDB         loop.Estimate            `json:"noise_rise_db"`          // mean over cells and slots of 10 log10(I0/N0), dB
	OutageProbability   loop.Estimate            `json:"outage_probability"`     // user-slots with combined SIR below target − margin
	OutageByLegs        [LegStates]loop.Estimate `json:"outage_by_legs"`         // outage among user-slots with 1, 2, ≥3 legs
	LegShare            [LegStates]loop.Estimate `json:"leg_share"`              // share of user-slots with 1, 2, ≥3 legs
	SoftHandoverShare   loop.Estimate            `json:"soft_handover_share"`    // share of user-slots with ≥ 2 legs
	TimeAtMaxPower      loop.Estimate            `json:"time_at_max_power"`      // share of user-slots at maximum power
	TimeAtMaxByLegs     [LegStates]loop.Estimate `json:"time_at_max_by_legs"`    // the same among 1, 2, ≥3 legs
	TimeAtMaxEdge       loop.Estimate            `json:"time_at_max_edge"`       // among users farther than 0.8·D/2 from the nearest site
	SIRErrorMeanDB      loop.Estimate            `json:"sir_error_mean_db"`      // combined SIR − target, dB
	SIRErrorStdDB       loop.Estimate            `json:"sir_error_std_db"`       // dB
	TxPowerMeanDBm      loop.Estimate            `json:"tx_power_mean_dbm"`      // mean of the transmit power in dBm
	AchievedBLER        loop.Estimate            `json:"achieved_bler"`          // selection-combined block error rate
	OtherToOwnSpreadP5  float64                  `json:"other_to_own_spread_p5"` // 5th percentile over cells and slots of the per-slot ratio
	OtherToOwnSpreadP95 float64                  `json:"other_to_own_spread_p95"`
}

// CellFigures are one cell's figures.
type CellFigures struct {
	Name           string        `json:"name"` // "S3" or "S3/2" (site 3, sector 2)
	Site           int           `json:"site"`
	OtherToOwn     loop.Estimate `json:"other_to_own"`
	OtherToOwnP50  float64       `json:"other_to_own_p50"` // median of the per-slot ratio
	OtherToOwnP95  float64       `json:"other_to_own_p95"`
	NoiseRiseDB    loop.Estimate `json:"noise_rise_db"`
	NoiseRiseP95DB float64       `json:"noise_rise_p95_db"`
	ServedUsers    float64       `json:"served_users"` // mean number of users whose best cell this is
}

// UserPoint is one user of replication 0 for maps: position, best cell at
// the end, mean legs, and its own outage and mean power.
type UserPoint struct {
	XM                float64 `json:"x_m"`
	YM                float64 `json:"y_m"`
	Group             int     `json:"group"`
	BestCell          int     `json:"best_cell"`
	MeanLegs          float64 `json:"mean_legs"`
	OutageProbability float64 `json:"outage_probability"`
	TxPowerMeanDBm    float64 `json:"tx_power_mean_dbm"`
}

// tq is the 97.5 % quantile of Student's t with dof ≥ 1 degrees of freedom
// (gonum distuv.StudentsT).
func tq(dof int) float64 {
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(dof)}.Quantile(0.975)
}

// meanInterval is the mean of units xs (batches or replications) with the
// Student-t interval over them.
func meanInterval(xs []float64) loop.Estimate {
	n := float64(len(xs))
	if n == 0 {
		return loop.Estimate{Value: math.NaN(), CILow: math.NaN(), CIHigh: math.NaN()}
	}
	m := 0.0
	for _, x := range xs {
		m += x
	}
	m /= n
	if n < 2 {
		return loop.Estimate{Value: m, CILow: m, CIHigh: m}
	}
	v := 0.0
	for _, x := range xs {
		v += (x - m) * (x - m)
	}
	se := math.Sqrt(v / (n - 1) / n)
	h := tq(len(xs)-1) * se
	return loop.Estimate{Value: m, CILow: m - h, CIHigh: m + h}
}

// proportionInterval is a proportion p̂ (total hits / total trials) with
// the Wilson interval at the effective sample size n_eff = p̂(1−p̂)/SE²,
// SE from the spread of the unit proportions ps (batches or replications,
// equal weight), n_eff capped at the trials; z replaced by Student's t.
func proportionInterval(hits, trials float64, ps []float64) loop.Estimate {
	if trials <= 0 {
		return loop.Estimate{Value: math.NaN(), CILow: math.NaN(), CIHigh: math.NaN()}
	}
	p := hits / trials
	k := len(ps)
	neff := trials
	if k >= 2 {
		m := 0.0
		for _, x := range ps {
			m += x
		}
		m /= float64(k)
		v := 0.0
		for _, x := range ps {
			v += (x - m) * (x - m)
		}
		se2 := v / float64(k-1) / float64(k)
		if se2 > 0 && p > 0 && p < 1 {
			neff = math.Min(trials, p*(1-p)/se2)
		}
	}
	z := 1.959963984540054
	if k >= 2 {
		z = tq(k - 1)
	}
	z2 := z * z
	den := 1 + z2/neff
	c := (p + z2/(2*neff)) / den
	h := z * math.Sqrt(p*(1-p)/neff+z2/(4*neff*neff)) / den
	return loop.Estimate{Value: p, CILow: math.Max(0, c-h), CIHigh: math.Min(1, c+h)}
}
