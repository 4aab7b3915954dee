package tune

import (
	"context"
	"fmt"
	"math"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
)

// Scores of a load found infeasible before the run (see sampleOf): worse
// than any load the engine can carry (an SIR error spread of 100 dB, a
// noise rise of 100 dB).
const (
	InfeasibleSIRErrorDB  = 100
	InfeasibleNoiseRiseDB = 100
)

// runScenario runs one replication of sc (sc.Run.Replications is 1 and
// sc.Run.Seed the replication's seed) through multicell.RunScenario — the
// single-cell engine loop.Run, or the multi-cell engine when layout.sites is
// set — and takes the aggregate figures of the report (in multi-cell mode
// the layout-wide figures).
func runScenario(ctx context.Context, sc *loop.Scenario) (Sample, error) {
	rep, err := multicell.RunScenario(ctx, *sc, loop.RunOptions{})
	if err != nil {
		return Sample{}, err
	}
	return sampleOf(sc, rep)
}

// sampleOf extracts the per-replication figures from a one-replication
// report. A figure the engine could not compute (NaN) is an error: the
// comparison would be meaningless.
//
// A load that the engine found infeasible before simulating (no slots run,
// no figures) is scored as the worst a carried load can be, so that it
// never ranks ahead of one: every user in outage and at maximum power,
// every block in error, and the SIR error at InfeasibleSIRErrorDB (mean
// −InfeasibleSIRErrorDB, std InfeasibleSIRErrorDB) and the noise rise at
// InfeasibleNoiseRiseDB; Sample.Infeasible says so.
func sampleOf(sc *loop.Scenario, rep *loop.Report) (Sample, error) {
	if rep.Feasibility.Infeasible && rep.SimulatedUserSlots == 0 {
		return Sample{
			SIRErrorMeanDB:    -InfeasibleSIRErrorDB,
			SIRErrorStdDB:     InfeasibleSIRErrorDB,
			OutageProbability: 1,
			BLER:              1,
			BLERTarget:        map[bool]float64{true: sc.OuterLoop.BLERTarget}[sc.OuterLoop.Enabled],
			TxPowerMeanDBm:    sc.InnerLoop.MaxPowerDBm,
			TimeAtMaxPower:    1,
			NoiseRiseDB:       InfeasibleNoiseRiseDB,
			Infeasible:        true,
		}, nil
	}
	a := rep.Aggregate
	s := Sample{
		SIRErrorMeanDB:    a.SIRErrorMeanDB.Value,
		SIRErrorStdDB:     a.SIRErrorStdDB.Value,
		OutageProbability: a.OutageProbability.Value,
		BLER:              a.AchievedBLER.Value,
		TxPowerMeanDBm:    a.TxPowerMeanDBm.Value,
		TimeAtMaxPower:    a.MaxPowerFraction.Value,
		NoiseRiseDB:       a.NoiseRiseMeanDB.Value,
		UserSlots:         rep.SimulatedUserSlots,
		Infeasible:        rep.Feasibility.Infeasible,
	}
	if rep.Layout != nil {
		s.Layout, s.OtherToOwn = true, rep.Layout.Overall.OtherToOwn.Value
		if math.IsNaN(s.OtherToOwn) || math.IsInf(s.OtherToOwn, 0) {
			s.OtherToOwn = 0
		}
	}
	if sc.OuterLoop.Enabled {
		s.BLERTarget = sc.OuterLoop.BLERTarget
	}
	for _, x := range []struct {
		name string
		v    float64
	}{
		{"sir_error_mean_db", s.SIRErrorMeanDB}, {"sir_error_std_db", s.SIRErrorStdDB},
		{"outage_probability", s.OutageProbability}, {"tx_power_mean_dbm", s.TxPowerMeanDBm},
	} {
		if math.IsNaN(x.v) || math.IsInf(x.v, 0) {
			return Sample{}, fmt.Errorf("tune: the engine returned %s = %g (seed %d)", x.name, x.v, sc.Run.Seed)
		}
	}
	for _, p := range []*float64{&s.BLER, &s.TimeAtMaxPower, &s.NoiseRiseDB} {
		if math.IsNaN(*p) || math.IsInf(*p, 0) {
			*p = 0
		}
	}
	return s, nil
}

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
	// Layout is set in multi-cell mode (the engine's report has a layout
	// section); OtherToOwn is then f, the layout-wide other-cell /
	// own-cell interference ratio (linear, >= 0), else 0.
	Layout     bool    `json:"layout,omitempty"`
	OtherToOwn float64 `json:"other_to_own,omitempty"`
	// UserSlots simulated (users × slots, warm-up included).
	UserSlots int64 `json:"user_slots"`
	// Infeasible is set when the engine reported that the users cannot all
	// reach their target.
	Infeasible bool `json:"infeasible"`
}
