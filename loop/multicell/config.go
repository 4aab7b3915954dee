package multicell

import (
	"fmt"
	"math"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
)

// Config is a multi-cell uplink: a hexagonal layout, users dropped in every
// site's hexagon, path loss and shadowing to every site, soft handover,
// per-cell inner loops combined at the user, and an outer loop on the
// selection-combined block result. Field paths in errors are the json tags.
type Config struct {
	Layout    Layout         `json:"layout"`
	Groups    []Group        `json:"groups"`     // user populations, each dropped in every cell
	Receiver  Receiver       `json:"receiver"`   // every cell's receiver
	Channel   Channel        `json:"channel"`    // path loss, shadowing, fading
	Handover  Handover       `json:"handover"`   // active set
	InnerLoop InnerLoop      `json:"inner_loop"` // per-cell closed loops
	OuterLoop loop.OuterLoop `json:"outer_loop"` // jump rule on the combined block result (loop.OuterLoop fields)
	Link      Link           `json:"link"`       // block error model of each leg
	OpenLoop  OpenLoop       `json:"open_loop"`  // optional open-loop setting under the closed loop
	Run       RunSettings    `json:"run"`
}

// Group is a user population: CountPerCell users per cell (so
// CountPerCell·SectorsPerSite per site hexagon), at SpeedKmh, over a
// built-in tap-delay profile whose taps become RAKE fingers as in one cell
// (loop.FingerSetFor with the Receiver's rake_fingers and max_fingers).
type Group struct {
	Name         string  `json:"name"`
	CountPerCell int     `json:"count_per_cell"` // [1, 1000]
	SpeedKmh     float64 `json:"speed_kmh"`      // [0, 500] km/h
	Profile      string  `json:"profile"`        // built-in profile name; default "flat" (one Rayleigh tap)
}

// Receiver is each cell's receiver: processing gain W/R = chip_rate_hz /
// bit_rate_bps, thermal noise −174 dBm/Hz + 10 log10(W) + noise figure.
// Each leg's channel has one tap per RAKE finger, resolved from the group's
// profile exactly as in the single-cell engine (loop.FingerSetFor: taps
// less than one chip apart merge, at most max_fingers kept, unless
// RAKE_FINGERS_IDEAL_EVERY_TAP); the power of dropped fingers is lost from
// the user's gain toward every cell.
type Receiver struct {
	ChipRateHz    float64          `json:"chip_rate_hz"`    // W, default 3.84e6
	BitRateBps    float64          `json:"bit_rate_bps"`    // R, default 12.2e3
	NoiseFigureDB float64          `json:"noise_figure_db"` // [0, 30]; default 5 (common practice)
	RakeFingers   loop.RakeFingers `json:"rake_fingers"`    // default RAKE_FINGERS_CHIP_RESOLVED
	MaxFingers    int              `json:"max_fingers"`     // [1, 64]; default loop.DefaultMaxFingers
}

// fingers is group g's finger set at this receiver (loop.FingerSetFor).
func (c Config) fingers(g int) (fading.FingerSet, error) {
	p, err := fading.BuiltinProfile(c.Groups[g].Profile)
	if err != nil {
		return fading.FingerSet{}, err
	}
	return loop.FingerSetFor(p, loop.Receiver{ChipRateHz: c.Receiver.ChipRateHz, RakeFingers: c.Receiver.RakeFingers, MaxFingers: c.Receiver.MaxFingers}, false, 0), nil
}

// Channel is the propagation model: log-distance path loss
// L = loss_at_1km_db + 10·n·log10(d / 1 km) for d ≥ min_distance_m, log-normal
// shadowing with standard deviation shadowing_db, correlated between sites
// with coefficient site_correlation (s_k = √ρ·a + √(1−ρ)·b_k) and in distance
// travelled after Gudmundson (decorrelation_m), and Rayleigh fast fading.
type Channel struct {
	PathLossExponent float64 `json:"path_loss_exponent"` // n, [2, 6]; default 3.76 (3GPP TR 25.942 (memory))
	LossAt1kmDB      float64 `json:"loss_at_1km_db"`     // [60, 200] dB; default 128.1 (3GPP TR 25.942, 2 GHz (memory))
	MinDistanceM     float64 `json:"min_distance_m"`     // [1, 1000] m; default 35 (common practice)
	ShadowingDB      float64 `json:"shadowing_db"`       // σ, [0, 20] dB; 0: none
	SiteCorrelation  float64 `json:"site_correlation"`   // ρ between sites, [0, 1]; default 0.5 (common practice)
	DecorrelationM   float64 `json:"decorrelation_m"`    // Gudmundson D, (0, 10000] m; default 50 (common practice)
	ShadowingSlots   int     `json:"shadowing_slots"`    // slots between shadowing updates, [1, 10000]; default loop.ShadowingSlotsFor (decorrelation_m/100 travelled by the fastest group)
	CarrierHz        float64 `json:"carrier_hz"`         // f_c for the Doppler f_D = v f_c / c; default 2e9
	// FastFading NONE leaves only path loss and shadowing (used by the
	// analytic checks); SLOW_TOWARD_OTHERS (default) fades the links of the
	// active set and uses the slow gain toward every other cell (the fast
	// fading of many interferers averages out); FULL fades every link
	// (layouts with users × cells ≤ MaxFullFadingLinks).
	FastFading FastFading `json:"fast_fading"`
}

// FastFading selects which links fade.
type FastFading int

// Fast-fading modes.
const (
	FastFadingUnspecified FastFading = iota // default: FastFadingSlowTowardOthers
	FastFadingNone
	FastFadingSlowTowardOthers
	FastFadingFull
)

// MaxFullFadingLinks bounds users × cells in FastFadingFull.
const MaxFullFadingLinks = 8192

// Handover is the active set: the cells whose slow gain is within window_db
// of the best; a cell joins when within window_db − hysteresis_db/2 and
// leaves when below window_db + hysteresis_db/2 (3GPP TS 25.331 events 1A/1B
// (memory)), at most max_active cells, re-evaluated every update_slots.
// max_active 1 and window 0 is hard handover to the best cell.
type Handover struct {
	WindowDB     float64 `json:"window_db"`     // [0, 20] dB; default 3 (common practice)
	HysteresisDB float64 `json:"hysteresis_db"` // [0, 10] dB; default 1
	MaxActive    int     `json:"max_active"`    // [1, 6]; default 3
	UpdateSlots  int     `json:"update_slots"`  // [1, 100000]; default 300 (200 ms at 1500 Hz)
}

// InnerLoop is the closed loop of every cell: each cell of a user's active
// set compares its SIR estimate with the target and sends up or down by
// step_db, received in error with command_error_prob; the user raises its
// power only when every cell says up (3GPP TS 25.214 §5.1.2.2.3, combining
// of TPC commands from different radio link sets (memory)); a command of
// slot t acts on slot t+1+feedback_delay_slots; power within [min, max].
// Mode IDEAL instead sets the power for the best cell's SIR to meet the
// target exactly each slot (Foschini & Miljanic 1993 iteration), a bound.
type InnerLoop struct {
	Mode                 InnerMode `json:"mode"`
	StepDB               float64   `json:"step_db"`                 // (0, 10]; default 1
	UpdateRateHz         float64   `json:"update_rate_hz"`          // [1, 100000]; default 1500
	FeedbackDelaySlots   int       `json:"feedback_delay_slots"`    // [0, 64]; default 0
	CommandErrorProb     float64   `json:"command_error_prob"`      // per cell, [0, 0.5]; default 0
	SIREstimationErrorDB float64   `json:"sir_estimation_error_db"` // σ of the log-normal SIR estimate, [0, 20] dB
	MinPowerDBm          float64   `json:"min_power_dbm"`           // default −50
	MaxPowerDBm          float64   `json:"max_power_dbm"`           // default 24 (power class 3 (memory))
}

// InnerMode selects the inner loop.
type InnerMode int

// Inner-loop modes.
const (
	InnerModeUnspecified InnerMode = iota // default: closed loop
	InnerModeClosedLoop
	InnerModeIdeal
)

// Link is a leg's block error model: the LOGISTIC curve of loop.LinkCurve,
// BLER(s) = 1/(1+exp((s − threshold_db)/slope_db)) at the block's mean SIR s
// in dB; a block is in error when every leg of the active set fails
// (selection combining).
type Link struct {
	ThresholdDB float64 `json:"threshold_db"` // [−30, 50] dB; default 5
	SlopeDB     float64 `json:"slope_db"`     // (0, 20] dB; default 1
}

// OpenLoop is open-loop power control under the closed loop: the user sets
// P = target + I0_est − G_est where G_est is its estimate of the slow gain to
// its best cell (downlink measurement: true gain plus a log-normal error of
// estimation_error_db, taken delay_slots old) and I0_est the thermal noise
// plus an assumed noise rise; the closed loop adds its accumulated
// corrections on top. The start-up power is the open-loop estimate either way.
type OpenLoop struct {
	Enabled            bool    `json:"enabled"`
	EstimationErrorDB  float64 `json:"estimation_error_db"`   // [0, 20] dB
	DelaySlots         int     `json:"delay_slots"`           // [0, 100000]
	AssumedNoiseRiseDB float64 `json:"assumed_noise_rise_db"` // [0, 30] dB; default 3 (common practice)
}

// RunSettings is the run length and seed.
type RunSettings struct {
	Slots          int64   `json:"slots"`        // per replication, warm-up included, [2, 10^8]
	WarmupSlots    int64   `json:"warmup_slots"` // < slots
	Replications   int     `json:"replications"` // independent drops, [1, 1000]; default 1
	Seed           uint64  `json:"seed"`
	OutageMarginDB float64 `json:"outage_margin_db"` // outage: combined SIR below target − margin; default 3
	Batches        int     `json:"batches"`          // batch means per replication, [4, 1000]; default 20
}

// Normalise fills documented defaults where a field is zero and zero is not
// a meaningful setting.
func (c *Config) Normalise() {
	setF := func(p *float64, v float64) {
		if *p == 0 {
			*p = v
		}
	}
	setI := func(p *int, v int) {
		if *p == 0 {
			*p = v
		}
	}
	setF(&c.Receiver.ChipRateHz, loop.DefaultChipRateHz)
	setF(&c.Receiver.BitRateBps, loop.DefaultBitRateBps)
	setF(&c.Receiver.NoiseFigureDB, 5)
	if c.Receiver.RakeFingers == loop.RakeFingersUnspecified {
		c.Receiver.RakeFingers = loop.RakeFingersChipResolved
	}
	setI(&c.Receiver.MaxFingers, loop.DefaultMaxFingers)
	setF(&c.Channel.PathLossExponent, 3.76)
	setF(&c.Channel.LossAt1kmDB, 128.1)
	setF(&c.Channel.MinDistanceM, 35)
	setF(&c.Channel.DecorrelationM, loop.DefaultDecorrelationM)
	setF(&c.Channel.CarrierHz, loop.DefaultCarrierHz)
	if c.Channel.FastFading == FastFadingUnspecified {
		c.Channel.FastFading = FastFadingSlowTowardOthers
	}
	setI(&c.Handover.MaxActive, 3)
	setI(&c.Handover.UpdateSlots, 300)
	if c.InnerLoop.Mode == InnerModeUnspecified {
		c.InnerLoop.Mode = InnerModeClosedLoop
	}
	setF(&c.InnerLoop.StepDB, loop.DefaultStepDB)
	setF(&c.InnerLoop.UpdateRateHz, loop.DefaultUpdateRateHz)
	setF(&c.InnerLoop.MinPowerDBm, loop.DefaultMinPowerDBm)
	setF(&c.InnerLoop.MaxPowerDBm, loop.DefaultMaxPowerDBm)
	fastest := 0.0
	for _, g := range c.Groups {
		fastest = math.Max(fastest, g.SpeedKmh)
	}
	setI(&c.Channel.ShadowingSlots, loop.ShadowingSlotsFor(c.Channel.DecorrelationM, fastest, c.InnerLoop.UpdateRateHz))
	setF(&c.OuterLoop.BLERTarget, loop.DefaultBLERTarget)
	setI(&c.OuterLoop.BlockSlots, loop.DefaultBlockSlots)
	setF(&c.OuterLoop.UpStepDB, loop.DefaultUpStepDB)
	if c.OuterLoop.MinTargetDB == 0 && c.OuterLoop.MaxTargetDB == 0 {
		c.OuterLoop.MinTargetDB, c.OuterLoop.MaxTargetDB = loop.DefaultMinTargetDB, loop.DefaultMaxTargetDB
	}
	setF(&c.Link.ThresholdDB, 5)
	setF(&c.Link.SlopeDB, loop.DefaultSlopeDB)
	setF(&c.OpenLoop.AssumedNoiseRiseDB, 3)
	setI(&c.Run.Replications, 1)
	setF(&c.Run.OutageMarginDB, loop.DefaultOutageMarginDB)
	setI(&c.Run.Batches, loop.DefaultBatches)
	for i := range c.Groups {
		if c.Groups[i].Profile == "" {
			c.Groups[i].Profile = "FLAT"
		}
	}
}

// Limits.
const (
	MaxUsers     = 20000 // users in a layout
	MaxSlots     = 1e8   // slots per replication
	MaxGroupSize = 1000  // count_per_cell
)

// Validate returns every broken rule (empty when valid), with json-tag
// field paths.
func (c Config) Validate() loop.Violations {
	var vs loop.Violations
	add := func(field, rule string, args ...any) {
		vs = append(vs, loop.Violation{Field: field, Rule: fmt.Sprintf(rule, args...)})
	}
	in := func(field string, x, lo, hi float64, unit string) {
		if !(x >= lo && x <= hi) {
			add(field, "must be in [%g, %g]%s, got %g", lo, hi, unit, x)
		}
	}
	c.Layout.validate(add, "layout.")
	if len(c.Groups) == 0 {
		add("groups", "must have at least one group")
	}
	users := 0
	for i, g := range c.Groups {
		p := fmt.Sprintf("groups[%d].", i)
		if g.CountPerCell < 1 || g.CountPerCell > MaxGroupSize {
			add(p+"count_per_cell", "must be in [1, %d], got %d", MaxGroupSize, g.CountPerCell)
		}
		in(p+"speed_kmh", g.SpeedKmh, 0, 500, " km/h")
		if _, err := fading.BuiltinProfile(g.Profile); err != nil {
			add(p+"profile", "must be a built-in profile (%v), got %q", fading.BuiltinProfileNames(), g.Profile)
		}
		users += g.CountPerCell * c.Layout.Cells()
	}
	if users > MaxUsers {
		add("groups", "the layout holds %d users, more than %d", users, MaxUsers)
	}
	in("receiver.chip_rate_hz", c.Receiver.ChipRateHz, 1e3, 1e9, " Hz")
	in("receiver.bit_rate_bps", c.Receiver.BitRateBps, 1, c.Receiver.ChipRateHz, " bit/s")
	in("receiver.noise_figure_db", c.Receiver.NoiseFigureDB, 0, 30, " dB")
	if c.Receiver.RakeFingers != loop.RakeFingersChipResolved && c.Receiver.RakeFingers != loop.RakeFingersIdealEveryTap {
		add("receiver.rake_fingers", "must be RAKE_FINGERS_CHIP_RESOLVED or RAKE_FINGERS_IDEAL_EVERY_TAP, got %d", c.Receiver.RakeFingers)
	}
	if c.Receiver.MaxFingers < 1 || c.Receiver.MaxFingers > fading.MaxFingers {
		add("receiver.max_fingers", "must be in [1, %d], got %d", fading.MaxFingers, c.Receiver.MaxFingers)
	}
	in("channel.path_loss_exponent", c.Channel.PathLossExponent, 2, 6, "")
	in("channel.loss_at_1km_db", c.Channel.LossAt1kmDB, 60, 200, " dB")
	in("channel.min_distance_m", c.Channel.MinDistanceM, 1, math.Min(1000, c.Layout.InterSiteDistanceM/4), " m")
	in("channel.shadowing_db", c.Channel.ShadowingDB, 0, 20, " dB")
	in("channel.site_correlation", c.Channel.SiteCorrelation, 0, 1, "")
	in("channel.decorrelation_m", c.Channel.DecorrelationM, 1e-3, 1e4, " m")
	if c.Channel.ShadowingSlots < 1 || c.Channel.ShadowingSlots > 10000 {
		add("channel.shadowing_slots", "must be in [1, 10000], got %d", c.Channel.ShadowingSlots)
	}
	in("channel.carrier_hz", c.Channel.CarrierHz, 1e6, 1e11, " Hz")
	switch c.Channel.FastFading {
	case FastFadingNone, FastFadingSlowTowardOthers:
	case FastFadingFull:
		if users*c.Layout.Cells() > MaxFullFadingLinks {
			add("channel.fast_fading", "FAST_FADING_FULL needs users × cells <= %d, got %d (%d users × %d cells): use FAST_FADING_SLOW_TOWARD_OTHERS, or fewer sites, sectors or users per cell",
				MaxFullFadingLinks, users*c.Layout.Cells(), users, c.Layout.Cells())
		}
	default:
		add("channel.fast_fading", "must be one of NONE, SLOW_TOWARD_OTHERS, FULL, got %d", c.Channel.FastFading)
	}
	in("handover.window_db", c.Handover.WindowDB, 0, 20, " dB")
	in("handover.hysteresis_db", c.Handover.HysteresisDB, 0, 10, " dB")
	if c.Handover.MaxActive < 1 || c.Handover.MaxActive > 6 {
		add("handover.max_active", "must be in [1, 6], got %d", c.Handover.MaxActive)
	}
	if c.Handover.UpdateSlots < 1 || c.Handover.UpdateSlots > 100000 {
		add("handover.update_slots", "must be in [1, 100000], got %d", c.Handover.UpdateSlots)
	}
	il := c.InnerLoop
	if il.Mode != InnerModeClosedLoop && il.Mode != InnerModeIdeal {
		add("inner_loop.mode", "must be CLOSED_LOOP or IDEAL, got %d", il.Mode)
	}
	in("inner_loop.step_db", il.StepDB, 1e-3, 10, " dB")
	in("inner_loop.update_rate_hz", il.UpdateRateHz, 1, 1e5, " Hz")
	if il.FeedbackDelaySlots < 0 || il.FeedbackDelaySlots > 64 {
		add("inner_loop.feedback_delay_slots", "must be in [0, 64], got %d", il.FeedbackDelaySlots)
	}
	in("inner_loop.command_error_prob", il.CommandErrorProb, 0, 0.5, "")
	in("inner_loop.sir_estimation_error_db", il.SIREstimationErrorDB, 0, 20, " dB")
	in("inner_loop.min_power_dbm", il.MinPowerDBm, -100, il.MaxPowerDBm, " dBm")
	in("inner_loop.max_power_dbm", il.MaxPowerDBm, il.MinPowerDBm, 60, " dBm")
	ol := c.OuterLoop
	in("outer_loop.bler_target", ol.BLERTarget, 1e-6, 0.5, "")
	if ol.BlockSlots < 1 || ol.BlockSlots > 100000 {
		add("outer_loop.block_slots", "must be in [1, 100000], got %d", ol.BlockSlots)
	}
	in("outer_loop.up_step_db", ol.UpStepDB, 1e-3, 10, " dB")
	in("outer_loop.initial_target_db", ol.InitialTargetDB, ol.MinTargetDB, ol.MaxTargetDB, " dB")
	in("link.threshold_db", c.Link.ThresholdDB, -30, 50, " dB")
	in("link.slope_db", c.Link.SlopeDB, 1e-3, 20, " dB")
	in("open_loop.estimation_error_db", c.OpenLoop.EstimationErrorDB, 0, 20, " dB")
	if c.OpenLoop.DelaySlots < 0 || c.OpenLoop.DelaySlots > 100000 {
		add("open_loop.delay_slots", "must be in [0, 100000], got %d", c.OpenLoop.DelaySlots)
	}
	in("open_loop.assumed_noise_rise_db", c.OpenLoop.AssumedNoiseRiseDB, 0, 30, " dB")
	if c.Run.Slots < 2 || c.Run.Slots > MaxSlots {
		add("run.slots", "must be in [2, %g], got %d", MaxSlots, c.Run.Slots)
	}
	if c.Run.WarmupSlots < 0 || c.Run.WarmupSlots >= c.Run.Slots {
		add("run.warmup_slots", "must be in [0, slots), got %d", c.Run.WarmupSlots)
	}
	if c.Run.Replications < 1 || c.Run.Replications > 1000 {
		add("run.replications", "must be in [1, 1000], got %d", c.Run.Replications)
	}
	in("run.outage_margin_db", c.Run.OutageMarginDB, 0, 30, " dB")
	if c.Run.Batches < 4 || c.Run.Batches > 1000 {
		add("run.batches", "must be in [4, 1000], got %d", c.Run.Batches)
	} else if c.Run.Slots-c.Run.WarmupSlots < int64(c.Run.Batches) {
		add("run.batches", "must be at most the measured slots %d, got %d", c.Run.Slots-c.Run.WarmupSlots, c.Run.Batches)
	}
	return vs
}
