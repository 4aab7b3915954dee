package multicell

import (
	"context"
	"strings"
	"time"

	"github.com/fadeloop/fadeloop/loop"
)

// EngineVersion identifies the multi-cell engine in reports (and in job
// IDs, so stored results of an older engine are not reused). 1.1.0:
// incremental cell sums and fading generated ahead (figures differ from
// 1.0.0 in the last digits, same distributions). 1.2.0: statistics summed
// per slot off the slot loop, legs' fading streams continue while unused
// (figures differ from 1.1.0, same distributions). 1.3.0: shadowing
// draws from fading.FastStream (xoshiro256++ and a ziggurat) instead of
// math/rand's PCG, dB-to-linear without a floor call (figures differ from
// 1.2.0, same distributions). 1.4.0: shadowing_slots 0 means an update
// each decorrelation_m/100 travelled by the fastest group
// (loop.ShadowingSlotsFor; was 15 slots whatever the speed), and the
// shadowing update interval counts toward the batch length only where
// shadowing changes (figures of scenarios that left it unset differ from
// 1.3.0), and the user figures are summed per user over a block before
// they join the batch sums (the last digits of every scenario's figures
// differ from 1.3.0, same distributions).
const EngineVersion = "fadeloop-multicell/1.4.0"

// RunScenario is the one dispatch point between the two engines, used by
// loop/tune (Sweep, Tune, Capacity) and by the service's Simulate and
// Sweep: a scenario without a layout runs on loop.Run unchanged; a
// scenario with layout.sites set is converted by FromScenario and run by
// Run, and its report is returned as a loop.Report (ToLoopReport) whose
// common figures are filled from the layout-wide figures and whose Layout
// section holds the multi-cell figures. The dispatch lives here because
// loop cannot import this package (it imports loop).
//
// In multi-cell mode traces are not available (opts.Trace.Users must be
// empty) and progress is reported once, at the end.
func RunScenario(ctx context.Context, sc loop.Scenario, opts loop.RunOptions) (*loop.Report, error) {
	if !sc.MultiCell() {
		return loop.Run(ctx, sc, opts)
	}
	start := time.Now()
	sc = cloneScenario(sc)
	sc.Normalise()
	if vs := sc.Validate(); len(vs) > 0 {
		return nil, vs
	}
	if len(opts.Trace.Users) > 0 {
		return nil, loop.Violations{{Field: "trace.users", Rule: "traces are not available in multi-cell mode (layout.sites set)"}}
	}
	cfg, vs := FromScenario(sc)
	if len(vs) > 0 {
		return nil, vs
	}
	rep, err := Run(ctx, cfg)
	if err != nil {
		if vs, ok := err.(loop.Violations); ok {
			return nil, mapViolations(vs)
		}
		return nil, err
	}
	out := ToLoopReport(sc, rep)
	out.WallTimeS = time.Since(start).Seconds()
	if out.WallTimeS > 0 {
		out.UserSlotsPerS = float64(out.SimulatedUserSlots) / out.WallTimeS
	}
	if opts.Progress != nil {
		el := time.Since(start)
		opts.Progress(loop.Progress{Fraction: 1, UserSlots: out.SimulatedUserSlots, TotalUserSlots: out.SimulatedUserSlots,
			UserSlotsPerS: out.UserSlotsPerS, Elapsed: el})
	}
	return out, nil
}

// Validate returns every rule sc (normalised) breaks for the engine that
// RunScenario would run it on: loop.Scenario.Validate, then, for a
// multi-cell scenario that passes it, the multi-cell engine's own rules
// (FromScenario: layout ranges, wrap-around, the FULL fading link limit,
// ...) with scenario field paths. It is the check RunScenario makes before
// it runs, for callers that must reject a scenario before any work (the
// sweep, tune and capacity planners).
func Validate(sc loop.Scenario) loop.Violations {
	if vs := sc.Validate(); len(vs) > 0 || !sc.MultiCell() {
		return vs
	}
	_, vs := FromScenario(sc)
	return vs
}

// cloneScenario copies the slices of sc that Normalise may change.
func cloneScenario(sc loop.Scenario) loop.Scenario {
	gs := make([]loop.UserGroup, len(sc.Groups))
	for i, g := range sc.Groups {
		g.Speeds = append([]loop.SpeedShare(nil), g.Speeds...)
		gs[i] = g
	}
	sc.Groups = gs
	return sc
}

// FromScenario converts a normalised, valid multi-cell scenario to a
// Config (normalised) and validates it; violations carry the scenario's
// field paths (e.g. layout.handover.window_db, groups[0].count).
func FromScenario(sc loop.Scenario) (Config, loop.Violations) {
	l := sc.Layout
	cfg := Config{
		Layout: Layout{Sites: l.Sites, SectorsPerSite: l.SectorsPerSite, InterSiteDistanceM: l.InterSiteDistanceM, WrapAround: l.WrapAround},
		Receiver: Receiver{
			ChipRateHz:    sc.Receiver.ChipRateHz,
			BitRateBps:    sc.Receiver.BitRateBps,
			NoiseFigureDB: sc.Receiver.NoiseFigureDB,
			RakeFingers:   sc.Receiver.RakeFingers,
			MaxFingers:    sc.Receiver.MaxFingers,
		},
		Channel: Channel{
			PathLossExponent: l.Propagation.PathLossExponent,
			LossAt1kmDB:      l.Propagation.LossAt1kmDB,
			MinDistanceM:     l.Propagation.MinDistanceM,
			ShadowingDB:      l.Propagation.ShadowingDB,
			SiteCorrelation:  l.Propagation.SiteCorrelation,
			DecorrelationM:   l.Propagation.DecorrelationM,
			ShadowingSlots:   l.Propagation.ShadowingSlots,
			FastFading:       FastFading(l.Propagation.FastFading),
		},
		Handover: Handover(l.Handover),
		InnerLoop: InnerLoop{
			StepDB:               sc.InnerLoop.StepDB,
			UpdateRateHz:         sc.InnerLoop.UpdateRateHz,
			FeedbackDelaySlots:   sc.InnerLoop.FeedbackDelaySlots,
			CommandErrorProb:     sc.InnerLoop.CommandErrorProb,
			SIREstimationErrorDB: sc.Receiver.SIREstimationErrorDB,
			MinPowerDBm:          sc.InnerLoop.MinPowerDBm,
			MaxPowerDBm:          sc.InnerLoop.MaxPowerDBm,
		},
		OuterLoop: sc.OuterLoop,
		Link:      Link{ThresholdDB: sc.Link.ThresholdDB, SlopeDB: sc.Link.SlopeDB},
		OpenLoop:  OpenLoop(l.OpenLoop),
		Run: RunSettings{
			Slots:          sc.TotalSlots(),
			WarmupSlots:    sc.Run.WarmupSlots,
			Replications:   sc.Run.Replications,
			Seed:           sc.Run.Seed,
			OutageMarginDB: sc.Run.OutageMarginDB,
			Batches:        sc.Run.Batches,
		},
	}
	switch sc.InnerLoop.Mode {
	case loop.InnerModeIdeal:
		cfg.InnerLoop.Mode = InnerModeIdeal
	case loop.InnerModeClosedLoop:
		cfg.InnerLoop.Mode = InnerModeClosedLoop
	default:
		cfg.InnerLoop.Mode = InnerMode(-1) // rejected by Validate
	}
	if len(sc.Groups) > 0 {
		cfg.Channel.CarrierHz = sc.Groups[0].CarrierFrequencyHz
	}
	for _, g := range sc.Groups {
		mg := Group{Name: g.Name, CountPerCell: g.Count, Profile: g.Profile}
		if len(g.Speeds) > 0 {
			mg.SpeedKmh = g.Speeds[0].SpeedKmh
		}
		cfg.Groups = append(cfg.Groups, mg)
	}
	cfg.Normalise()
	return cfg, mapViolations(cfg.Validate())
}

// pathMap turns Config field paths into Scenario field paths (longest
// prefix first).
var pathMap = []struct{ from, to string }{
	{"channel.carrier_hz", "groups[0].carrier_frequency_hz"},
	{"channel.", "layout.propagation."},
	{"handover.", "layout.handover."},
	{"open_loop.", "layout.open_loop."},
	{"inner_loop.sir_estimation_error_db", "receiver.sir_estimation_error_db"},
}

// mapViolations rewrites Config paths to Scenario paths.
func mapViolations(vs loop.Violations) loop.Violations {
	if len(vs) == 0 {
		return nil
	}
	out := make(loop.Violations, len(vs))
	for i, v := range vs {
		f := v.Field
		for _, m := range pathMap {
			if strings.HasPrefix(f, m.from) {
				f = m.to + strings.TrimPrefix(f, m.from)
				break
			}
		}
		if strings.HasPrefix(f, "groups[") {
			f = strings.Replace(f, ".count_per_cell", ".count", 1)
			f = strings.Replace(f, ".speed_kmh", ".speeds[0].speed_kmh", 1)
		}
		out[i] = loop.Violation{Field: f, Rule: v.Rule}
	}
	return out
}

// ToLoopReport returns a multi-cell report as a loop.Report for sc (the
// normalised scenario): Layout holds the multi-cell figures, and the
// aggregate Figures are the layout-wide ones so that every consumer of a
// report keeps working — SIR error mean and standard deviation, outage,
// achieved BLER (and its error against the target with the outer loop
// on), mean Tx power, time at max power (max_power_fraction), and the noise
// rise (mean over cells and slots; noise_rise_p95_db the 95th percentile
// over cells and slots, with its interval: Report.NoiseRiseP95DB). Percentiles, convergence time,
// per-user figures, distance bins and feasibility are not computed in
// multi-cell mode (a note says so).
func ToLoopReport(sc loop.Scenario, r *Report) *loop.Report {
	o := r.Overall
	agg := loop.Figures{
		SIRErrorMeanDB:    o.SIRErrorMeanDB,
		SIRErrorStdDB:     o.SIRErrorStdDB,
		OutageProbability: o.OutageProbability,
		AchievedBLER:      o.AchievedBLER,
		TxPowerMeanDBm:    o.TxPowerMeanDBm,
		MaxPowerFraction:  o.TimeAtMaxPower,
		NoiseRiseMeanDB:   o.NoiseRiseDB,
		Users:             r.Users,
		UserSlots:         int64(r.Users) * r.MeasuredSlots * int64(r.Config.Run.Replications),
	}
	if sc.OuterLoop.Enabled {
		t := sc.OuterLoop.BLERTarget
		agg.BLERTargetError = loop.Estimate{Value: o.AchievedBLER.Value - t, CILow: o.AchievedBLER.CILow - t, CIHigh: o.AchievedBLER.CIHigh - t}
	}
	agg.NoiseRiseP95DB = r.NoiseRiseP95DB
	lr := &loop.LayoutReport{Overall: o, Cells: r.Cells, UserPoints: r.UserPoints}
	notes := []string{"multi-cell mode: the aggregate figures are the layout's; percentiles, convergence time, per-user and per-distance figures and feasibility are not computed (see layout)"}
	if r.intervalNote != "" {
		// One replication: what the intervals describe, or why there are
		// none (merge; coverage in coverage_test.go).
		notes = append(notes, r.intervalNote)
	}
	if note := sc.OuterLoop.WarmupNote(sc.Run.WarmupSlots); note != "" {
		notes = append(notes, note)
	}
	notes = append(notes, loop.Caution)
	return &loop.Report{
		Aggregate:          agg,
		NormalisedScenario: sc,
		Seed:               sc.Run.Seed,
		EngineVersion:      EngineVersion,
		Replications:       r.Config.Run.Replications,
		Slots:              r.MeasuredSlots,
		SimulatedUserSlots: r.SimulatedUserSlots,
		Notes:              notes,
		Layout:             lr,
	}
}
