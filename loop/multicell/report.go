package multicell

import (
	"math"

	"github.com/fadeloop/fadeloop/loop"
)

// Report is a multi-cell run's result. Ratios and noise rise are measured,
// not assumed: other_to_own is the ratio of the mean interference a cell
// receives from users served by other cells to that from its own users
// (the "f" of pole-capacity formulas), with a user served by the best cell
// of its active set.
//
// Intervals (95 %) and what they estimate:
//
//   - several replications (independent drops of users): the expectation
//     over drops of the figure (of a run of this length); Student t over
//     the replications' values;
//   - one replication: this drop's long-run value — the limit of the
//     figure's time average as the run grows, with the users' positions
//     (path loss, antenna gains) fixed and shadowing, fading and the loops
//     evolving in time (a group at 0 km/h keeps its shadowing and fading:
//     they are part of the drop). It says nothing about other drops.
//     Student t over batch groups in time, each spanning at least
//     groupDecorrelationTimes decorrelation times of the run's slowest
//     process (decorrelationSlots); when fewer than minBatchGroups such
//     groups fit in the run, no interval is given: CILow and CIHigh are NaN
//     (Value is kept) and the report's note gives the run length needed.
//
// Proportions use the Wilson interval on the effective sample size implied
// by that spread, inside [0, 1]. The layout-wide noise-rise percentile gets
// its interval the same way, from the spread of the percentile over batch
// groups or replications; the per-cell and spread percentiles are point
// values (no interval). Coverage is checked in coverage_test.go.
type Report struct {
	Config             Config         `json:"config"` // normalised
	Users              int            `json:"users"`
	MeasuredSlots      int64          `json:"measured_slots"` // per replication, warm-up excluded
	SimulatedUserSlots int64          `json:"simulated_user_slots"`
	Overall            OverallFigures `json:"overall"`
	Cells              []CellFigures  `json:"cells"`
	// NoiseRiseP95DB is the 95th percentile of the per-slot noise rise
	// over every cell and slot, dB, with its interval (riseP95). The
	// per-cell percentiles (CellFigures) are point values without one.
	NoiseRiseP95DB loop.Estimate `json:"noise_rise_p95_db"`
	UserPoints     []UserPoint   `json:"user_points"` // replication 0's drop, for maps

	// intervalNote: one replication, what the intervals describe or why
	// there are none (merge); a note of ToLoopReport.
	intervalNote string
}

// LegStates are the handover states reported separately: one, two, and
// three or more cells in the active set.
const LegStates = loop.LegStates

// The figure types live in package loop (the report section of a Scenario
// with a layout, mirrored by the fadeloop.v1 RunReport.layout message).
type (
	OverallFigures = loop.LayoutOverall   // layout-wide figures
	CellFigures    = loop.LayoutCell      // one cell's figures
	UserPoint      = loop.LayoutUserPoint // one user of replication 0, for maps
)

// meanInterval is the mean of units xs (batches or replications) with the
// Student-t interval over them.
func meanInterval(xs []float64) loop.Estimate {
	n := float64(len(xs))
	if n == 0 {
		return loop.Withheld(math.NaN())
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
	h := loop.StudentT95(len(xs)-1) * se
	return loop.Estimate{Value: m, CILow: m - h, CIHigh: m + h}
}

// proportionInterval is a proportion p̂ (total hits / total trials) with
// the Wilson interval at the effective sample size n_eff = p̂(1−p̂)/SE²,
// SE from the spread of the unit proportions ps (batches or replications,
// equal weight), n_eff capped at the trials; z replaced by Student's t.
func proportionInterval(hits, trials float64, ps []float64) loop.Estimate {
	if trials <= 0 {
		return loop.Withheld(math.NaN())
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
		z = loop.StudentT95(k - 1)
	}
	lo, hi := loop.WilsonInterval(p, neff, z)
	return loop.Estimate{Value: p, CILow: lo, CIHigh: hi}
}
