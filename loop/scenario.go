package loop

import (
	"fmt"
	"math"
	"strings"
)

// Scenario is one uplink power-control simulation: a receiver, the user
// groups sharing it, the inner and outer loop, the link curve that maps a
// block's SIR to a block error probability, and the run settings. It mirrors
// the fadeloop.v1 Scenario message field for field: every field's json tag is
// the proto field name, so a path such as `groups[1].speeds[0].speed_kmh`
// names the same value in both (validation, SetPath, sweeps).
//
// Call Normalise to fill defaults, then Validate.
type Scenario struct {
	Name      string      `json:"name"`       // free-form label, echoed in reports
	Receiver  Receiver    `json:"receiver"`   // the shared base-station receiver
	Groups    []UserGroup `json:"groups"`     // user groups, >= 1; users are numbered in group order
	InnerLoop InnerLoop   `json:"inner_loop"` // inner-loop settings, shared by all users
	OuterLoop OuterLoop   `json:"outer_loop"` // outer-loop settings, shared by all users
	Link      LinkCurve   `json:"link"`       // link abstraction
	Run       RunSettings `json:"run"`        // length, seed, replications, statistics
	Layout    Layout      `json:"layout"`     // multi-cell layout; unset (sites 0): one cell with other_cell_ratio
}

// Receiver is the base-station receiver all users share.
//
// Thermal noise N = −174 dBm/Hz + 10·log10(chip_rate_hz) + noise_figure_db;
// processing gain G_p = chip_rate_hz / bit_rate_bps.
type Receiver struct {
	ChipRateHz           float64 `json:"chip_rate_hz"`            // spread bandwidth in Hz, (0, 1e10]; default 3.84e6
	BitRateBps           float64 `json:"bit_rate_bps"`            // user bit rate in bit/s, (0, chip_rate_hz]; default 12.2e3
	NoiseFigureDB        float64 `json:"noise_figure_db"`         // receiver noise figure in dB, [0, 30]
	OtherCellRatio       float64 `json:"other_cell_ratio"`        // other-cell interference f as a fraction of own-cell received power, [0, 10]
	SIREstimationErrorDB float64 `json:"sir_estimation_error_db"` // σ in dB of the log-normal SIR estimation error, [0, 20]
	SIRAveragingSlots    int     `json:"sir_averaging_slots"`     // moving average of the SIR estimate in slots, [1, 1000]; 0 means 1
	// RakeFingers is how a group's taps become RAKE fingers; default
	// RAKE_FINGERS_CHIP_RESOLVED (taps less than one chip, 1/chip_rate_hz,
	// apart merge into one finger: fading.ResolveFingers).
	// RAKE_FINGERS_IDEAL_EVERY_TAP is the ideal receiver that combines every
	// tap separately whatever the chip rate.
	RakeFingers RakeFingers `json:"rake_fingers"`
	// MaxFingers is the most fingers combined per user with
	// RAKE_FINGERS_CHIP_RESOLVED (the strongest are kept), [1, 64];
	// default 4 (common practice for base-station RAKE receivers).
	MaxFingers int `json:"max_fingers"`
}

// SpeedShare is one speed of a group's speed mix.
type SpeedShare struct {
	SpeedKmh float64 `json:"speed_kmh"` // mobile speed in km/h, [0, 1000]; Doppler f_D = v·f_c/c
	Weight   float64 `json:"weight"`    // relative weight, (0, 1e6]; users are assigned in proportion, deterministically; all unset in a group: 1 each
}

// Tap is one tap of a custom tap-delay profile.
type Tap struct {
	DelayNs float64 `json:"delay_ns"` // excess delay in ns, [0, 1e6], strictly ascending across taps
	PowerDB float64 `json:"power_db"` // mean relative power in dB, [−100, 50]; profiles are normalised to unit power
}

// PathLoss is a group's distance-dependent mean path loss (dB, positive =
// loss). Models and their validity ranges are those of package fading.
type PathLoss struct {
	Model         PathLossModel `json:"model"`           // the model; unset: LOG_DISTANCE (with the defaults below when no parameter is set)
	RefDistanceM  float64       `json:"ref_distance_m"`  // LOG_DISTANCE: reference distance d0 in m, (0, 1e5]; with ref_loss_db and exponent all 0: 10 m, 52.9 dB, 3.76
	RefLossDB     float64       `json:"ref_loss_db"`     // LOG_DISTANCE: loss at d0 in dB, [0, 300]
	Exponent      float64       `json:"exponent"`        // LOG_DISTANCE: exponent n, (0, 10]
	BaseHeightM   float64       `json:"base_height_m"`   // Hata models: base antenna height in m; default 30
	MobileHeightM float64       `json:"mobile_height_m"` // Hata models: mobile antenna height in m; default 1.5
}

// UserGroup is a set of users sharing placement, mobility, channel profile,
// shadowing, path loss and activity. Channel power gain of user i:
// g_i(t) = 10^(−L_i/10) · S_i(t) · Σ_l |h_il(t)|² (DESIGN.md "Model").
type UserGroup struct {
	Name                    string       `json:"name"`                      // free-form label
	Count                   int          `json:"count"`                     // users in the group, [1, 4096]
	Placement               Placement    `json:"placement"`                 // how users are placed; unset: EXPLICIT with distances_m, else UNIFORM_AREA with max_distance_m
	DistancesM              []float64    `json:"distances_m"`               // PLACEMENT_EXPLICIT: one distance in m per user, (0, 1e6]
	MinDistanceM            float64      `json:"min_distance_m"`            // uniform placements: inner radius in m, 0 < min <= max; default min(35, max_distance_m)
	MaxDistanceM            float64      `json:"max_distance_m"`            // uniform placements: outer radius in m, <= 1e6
	Speeds                  []SpeedShare `json:"speeds"`                    // speed mix, 1 to 16 entries; weights all unset mean equal weights
	CarrierFrequencyHz      float64      `json:"carrier_frequency_hz"`      // carrier in Hz, [1e6, 1e11]; default 2e9
	Profile                 string       `json:"profile"`                   // built-in profile FLAT/EPA/EVA/ETU/PEDA/VEHA; exactly one of profile, custom_taps; default FLAT when neither is set
	CustomTaps              []Tap        `json:"custom_taps"`               // custom profile, 1 to 64 taps
	RicianKDB               float64      `json:"rician_k_db"`               // Rician K of the first tap in dB, [−50, 50]; used when los
	LOS                     bool         `json:"los"`                       // first tap Rician with a line-of-sight component
	Generator               Generator    `json:"generator"`                 // fading generator; default GENERATOR_DEFAULT
	Sinusoids               int          `json:"sinusoids"`                 // sinusoids per branch of the sum-of-sinusoids generators, [0, 256]; 0 = the generator's default
	ShadowingSigmaDB        float64      `json:"shadowing_sigma_db"`        // log-normal shadowing σ in dB, [0, 20]
	ShadowingDecorrelationM float64      `json:"shadowing_decorrelation_m"` // Gudmundson decorrelation distance in m (correlation 1/e); default 50 when σ > 0
	PathLoss                PathLoss     `json:"path_loss"`                 // mean path loss model; default LOG_DISTANCE 52.9 dB at 10 m, exponent 3.76
	ActivityFactor          float64      `json:"activity_factor"`           // fraction of slots on, (0, 1]; 0 means 1 (always on)
	MeanBurstSlots          float64      `json:"mean_burst_slots"`          // mean on-burst in slots of the on/off Markov chain, >= 1; default 1500
}

// InnerLoop is the inner (closed) loop shared by every user.
type InnerLoop struct {
	Mode               InnerMode    `json:"mode"`                 // FIXED_POWER, IDEAL or CLOSED_LOOP; default CLOSED_LOOP
	Command            Command      `json:"command"`              // CLOSED_LOOP command type; default FIXED_STEP
	UpdateRateHz       float64      `json:"update_rate_hz"`       // slot (update) rate in Hz, (0, 1e5]; default 1500
	StepDB             float64      `json:"step_db"`              // FIXED_STEP step and ADAPTIVE base step in dB, (0, 10]; default 1
	LevelsDB           []float64    `json:"levels_db"`            // MULTI_LEVEL commands in dB, 2 to 16, strictly ascending, [−20, 20]; default [−1, 0, 1, 3]
	ThresholdsDB       []float64    `json:"thresholds_db"`        // MULTI_LEVEL SIR-error thresholds in dB, len(levels)−1, strictly ascending; default [−3, −0.5, 0.5]
	FeedbackDelaySlots int          `json:"feedback_delay_slots"` // D in slots, [0, 1000]: a command decided from slot t changes the power of slot t+1+D
	CommandErrorProb   float64      `json:"command_error_prob"`   // probability a command is received in error, [0, 0.5]
	MinPowerDBm        float64      `json:"min_power_dbm"`        // minimum transmit power in dBm, [−100, 60]
	MaxPowerDBm        float64      `json:"max_power_dbm"`        // maximum transmit power in dBm, > min; both 0 means [−50, 24]
	InitialPower       InitialPower `json:"initial_power"`        // OPEN_LOOP or FIXED; default OPEN_LOOP
	InitialPowerDBm    float64      `json:"initial_power_dbm"`    // INITIAL_POWER_FIXED start power in dBm, within [min, max]
	FixedPowerDBm      float64      `json:"fixed_power_dbm"`      // FIXED_POWER mode transmit power in dBm, within [min, max]
}

// OuterLoop is the SIR-target loop (the jump rule, Sampath, Kumar &
// Holtzman, IEEE VTC 1997): after each block of block_slots slots the target
// rises by up_step_db on a block error and falls by
// up_step_db·τ/(1−τ) otherwise, so that at equilibrium the achieved BLER is
// τ = bler_target.
type OuterLoop struct {
	Enabled          bool    `json:"enabled"`             // run the outer loop; when false the fixed target is initial_target_db
	BLERTarget       float64 `json:"bler_target"`         // τ, (0, 1); default 0.1
	BlockSlots       int     `json:"block_slots"`         // B, slots per block, [1, 100000]; default 15
	UpStepDB         float64 `json:"up_step_db"`          // Δ_up in dB, (0, 10]; default 0.5
	MinTargetDB      float64 `json:"min_target_db"`       // lowest target in dB, [−30, 50]
	MaxTargetDB      float64 `json:"max_target_db"`       // highest target in dB; both 0 means [−10, 30]
	InitialTargetDB  float64 `json:"initial_target_db"`   // start (or fixed) SIR target in dB, [−30, 50]
	FreezeAtMaxPower bool    `json:"freeze_at_max_power"` // hold the target while the user is at maximum power
}

// WarmupNote is the report note for a run whose warm-up (warmupSlots) is
// shorter than one expected block error per user at the BLER target,
// block_slots/bler_target slots — the jump rule moves the target up once
// per block error, so before the first the target has only drifted down
// from its initial value (common practice: warm up for at least that
// long). "" when the outer loop is off or the warm-up is long enough.
func (o OuterLoop) WarmupNote(warmupSlots int64) string {
	if !o.Enabled || !(o.BLERTarget > 0) || o.BlockSlots <= 0 {
		return ""
	}
	need := int64(math.Ceil(float64(o.BlockSlots) / o.BLERTarget))
	if warmupSlots >= need {
		return ""
	}
	return fmt.Sprintf("warm-up of %d slots is shorter than one expected block error per user at the BLER target (block_slots/bler_target = %d slots): the outer loop had not settled when measuring began, so the achieved BLER and the SIR figures include its start-up; set run.warmup_slots to %d or more", warmupSlots, need, need)
}

// LinkPoint is one point of a tabulated link curve.
type LinkPoint struct {
	SIRDB float64 `json:"sir_db"` // effective SIR in dB, [−50, 60], strictly ascending
	BLER  float64 `json:"bler"`   // block error probability, [0, 1], non-increasing
}

// LinkCurve maps a block's effective SIR s (dB) to its block error
// probability: LOGISTIC BLER(s) = 1/(1+exp((s−threshold_db)/slope_db)), or a
// TABLE interpolated linearly in (s, log10 BLER) and held flat outside.
// The effective SIR of a block of per-slot SIRs γ_k is the linear mean, or
// EESM γ_eff = −β ln((1/B) Σ_k exp(−γ_k/β)).
type LinkCurve struct {
	Kind         LinkKind     `json:"kind"`          // default LINK_KIND_LOGISTIC
	ThresholdDB  float64      `json:"threshold_db"`  // LOGISTIC: SIR at BLER 0.5 in dB, [−30, 50]
	SlopeDB      float64      `json:"slope_db"`      // LOGISTIC: slope in dB, (0, 20]; default 1
	Table        []LinkPoint  `json:"table"`         // TABLE: 2 to 256 points
	EffectiveSIR EffectiveSIR `json:"effective_sir"` // default EFFECTIVE_SIR_LINEAR_MEAN
	EESMBeta     float64      `json:"eesm_beta"`     // EESM β (linear), (0, 1000]; default 1
}

// RunSettings is the run length, seed and statistics settings.
type RunSettings struct {
	Slots          int64   `json:"slots"`            // slots per replication, warm-up included; at most one of slots, duration_s; neither means duration_s 10
	DurationS      float64 `json:"duration_s"`       // run length in s (slots = round(duration_s·update_rate_hz))
	WarmupSlots    int64   `json:"warmup_slots"`     // first slots excluded from the figures, < slots
	Seed           uint64  `json:"seed"`             // seed of every random stream
	Replications   int     `json:"replications"`     // independent replications, [1, 10000]; default 1
	OutageMarginDB float64 `json:"outage_margin_db"` // outage = SIR below target − margin, [0, 30]; 0 means 3
	DistanceBins   int     `json:"distance_bins"`    // distance bins of the per-bin figures, [1, 64]; default 4
	Batches        int     `json:"batches"`          // batches of the batch-means confidence intervals, [20, 10000]; default 20
}

// Defaults filled by Normalise, with their sources.
const (
	DefaultChipRateHz       = 3.84e6 // 3GPP UTRA FDD chip rate
	DefaultBitRateBps       = 12.2e3 // AMR 12.2 kbit/s speech
	DefaultCarrierHz        = 2e9    // UMTS core band (common practice)
	DefaultUpdateRateHz     = 1500   // 3GPP TS 25.214 §5.1.2.2 (memory)
	DefaultStepDB           = 1      // 3GPP TS 25.214 §5.1.2.2.2 algorithm 1, 1 dB step (memory)
	DefaultMinPowerDBm      = -50    // UTRA UE minimum output power (3GPP TS 25.101 (memory))
	DefaultMaxPowerDBm      = 24     // 3GPP power class 3 UE (memory)
	DefaultBLERTarget       = 0.1    // speech BLER target (common practice)
	DefaultBlockSlots       = 15     // one 10 ms frame at 1500 Hz
	DefaultUpStepDB         = 0.5    // outer-loop up step (common practice)
	DefaultMinTargetDB      = -10    // SIR-target limits (common practice)
	DefaultMaxTargetDB      = 30     // SIR-target limits (common practice)
	DefaultSlopeDB          = 1      // logistic link-curve slope (common practice)
	DefaultEESMBeta         = 1      // EESM β for low-order modulation (common practice)
	DefaultOutageMarginDB   = 3      // outage at target − 3 dB (common practice)
	DefaultDistanceBins     = 4      // distance bins of the per-bin figures (a display choice)
	DefaultBatches          = 20     // fewest batch means for a Student t interval (DEVELOPERS.md, common practice)
	DefaultMeanBurstSlots   = 1500   // about 1 s talk spurts at 1500 Hz (common practice)
	DefaultDecorrelationM   = 50     // urban macro shadowing decorrelation, Gudmundson model (common practice)
	DefaultBaseHeightM      = 30     // Hata base height, lower end of its 30–200 m range (common practice)
	DefaultMobileHeightM    = 1.5    // Hata reference mobile height (common practice)
	DefaultLogDistRefM      = 10
	DefaultLogDistRefLossDB = 52.9 // 128.1 + 37.6·log10(d/1 km) referred to 10 m: 3GPP TR 25.942 macro cell at 2 GHz (memory)
	DefaultLogDistExponent  = 3.76 // same model
	DefaultMaxFingers       = 4    // RAKE fingers per user of a base-station receiver (common practice)
	DefaultMinDistanceM     = 35   // minimum BS-UE distance of the macro-cell scenario, 3GPP TR 25.942 (memory)
	DefaultDurationS        = 10.0 // run length when neither slots nor duration_s is set: 15 000 slots at 1500 Hz, over 500 Doppler periods at 30 km/h and 2 GHz (common practice)
)

// DefaultLevelsDB and DefaultThresholdsDB are the MULTI_LEVEL defaults: the
// LTE accumulated TPC set {−1, 0, +1, +3} dB (3GPP TS 36.213 §5.1.1.1 (memory))
// with SIR-error thresholds chosen here (common practice).
var (
	DefaultLevelsDB     = []float64{-1, 0, 1, 3}
	DefaultThresholdsDB = []float64{-3, -0.5, 0.5}
)

// Normalise fills the documented defaults in place: only values that are
// unset (zero) where zero is not a meaningful setting. It never fails;
// Validate judges the result. Profile names are upper-cased.
func (sc *Scenario) Normalise() {
	r := &sc.Receiver
	if r.ChipRateHz == 0 {
		r.ChipRateHz = DefaultChipRateHz
	}
	if r.BitRateBps == 0 {
		r.BitRateBps = DefaultBitRateBps
	}
	if r.SIRAveragingSlots == 0 {
		r.SIRAveragingSlots = 1
	}
	if r.RakeFingers == RakeFingersUnspecified {
		r.RakeFingers = RakeFingersChipResolved
	}
	if r.MaxFingers == 0 {
		r.MaxFingers = DefaultMaxFingers
	}
	for i := range sc.Groups {
		g := &sc.Groups[i]
		if g.Placement == PlacementUnspecified {
			if len(g.DistancesM) > 0 {
				g.Placement = PlacementExplicit
			} else if g.MaxDistanceM > 0 {
				g.Placement = PlacementUniformArea
			}
		}
		if (g.Placement == PlacementUniformArea || g.Placement == PlacementUniformDistance) &&
			g.MinDistanceM == 0 && g.MaxDistanceM > 0 {
			g.MinDistanceM = math.Min(DefaultMinDistanceM, g.MaxDistanceM)
		}
		if g.CarrierFrequencyHz == 0 {
			g.CarrierFrequencyHz = DefaultCarrierHz
		}
		g.Profile = strings.ToUpper(strings.TrimSpace(g.Profile))
		if g.Profile == "" && len(g.CustomTaps) == 0 {
			g.Profile = "FLAT"
		}
		if g.Generator == GeneratorUnspecified {
			g.Generator = GeneratorDefault
		}
		if g.ShadowingSigmaDB > 0 && g.ShadowingDecorrelationM == 0 {
			g.ShadowingDecorrelationM = DefaultDecorrelationM
		}
		pl := &g.PathLoss
		if pl.Model == PathLossUnspecified && (pl.RefDistanceM != 0 || pl.RefLossDB != 0 || pl.Exponent != 0) {
			pl.Model = PathLossLogDistance // its parameters are given
		}
		if (pl.Model == PathLossUnspecified || pl.Model == PathLossLogDistance) && pl.RefDistanceM == 0 && pl.RefLossDB == 0 && pl.Exponent == 0 {
			pl.Model = PathLossLogDistance
			pl.RefDistanceM = DefaultLogDistRefM
			pl.RefLossDB = DefaultLogDistRefLossDB
			pl.Exponent = DefaultLogDistExponent
		}
		if pl.Model >= PathLossHataUrban {
			if pl.BaseHeightM == 0 {
				pl.BaseHeightM = DefaultBaseHeightM
			}
			if pl.MobileHeightM == 0 {
				pl.MobileHeightM = DefaultMobileHeightM
			}
		}
		if g.ActivityFactor == 0 {
			g.ActivityFactor = 1
		}
		if g.ActivityFactor < 1 && g.MeanBurstSlots == 0 {
			g.MeanBurstSlots = DefaultMeanBurstSlots
		}
		allZero := len(g.Speeds) > 0
		for _, s := range g.Speeds {
			if s.Weight != 0 {
				allZero = false
			}
		}
		if allZero {
			for j := range g.Speeds {
				g.Speeds[j].Weight = 1
			}
		}
	}
	il := &sc.InnerLoop
	if il.Mode == InnerModeUnspecified {
		il.Mode = InnerModeClosedLoop
	}
	if il.Command == CommandUnspecified {
		il.Command = CommandFixedStep
	}
	if il.UpdateRateHz == 0 {
		il.UpdateRateHz = DefaultUpdateRateHz
	}
	if il.StepDB == 0 {
		il.StepDB = DefaultStepDB
	}
	if il.Command == CommandMultiLevel && len(il.LevelsDB) == 0 && len(il.ThresholdsDB) == 0 {
		il.LevelsDB = append([]float64(nil), DefaultLevelsDB...)
		il.ThresholdsDB = append([]float64(nil), DefaultThresholdsDB...)
	}
	if il.MinPowerDBm == 0 && il.MaxPowerDBm == 0 {
		il.MinPowerDBm, il.MaxPowerDBm = DefaultMinPowerDBm, DefaultMaxPowerDBm
	}
	if il.InitialPower == InitialPowerUnspecified {
		il.InitialPower = InitialPowerOpenLoop
	}
	ol := &sc.OuterLoop
	if ol.BLERTarget == 0 {
		ol.BLERTarget = DefaultBLERTarget
	}
	if ol.BlockSlots == 0 {
		ol.BlockSlots = DefaultBlockSlots
	}
	if ol.UpStepDB == 0 {
		ol.UpStepDB = DefaultUpStepDB
	}
	if ol.MinTargetDB == 0 && ol.MaxTargetDB == 0 {
		ol.MinTargetDB, ol.MaxTargetDB = DefaultMinTargetDB, DefaultMaxTargetDB
	}
	lk := &sc.Link
	if lk.Kind == LinkUnspecified {
		lk.Kind = LinkLogistic
	}
	if lk.SlopeDB == 0 {
		lk.SlopeDB = DefaultSlopeDB
	}
	if lk.EffectiveSIR == EffectiveSIRUnspecified {
		lk.EffectiveSIR = EffectiveSIRLinearMean
	}
	if lk.EESMBeta == 0 {
		lk.EESMBeta = DefaultEESMBeta
	}
	rs := &sc.Run
	if rs.Slots == 0 && rs.DurationS == 0 {
		rs.DurationS = DefaultDurationS
	}
	if rs.Replications == 0 {
		rs.Replications = 1
	}
	if rs.OutageMarginDB == 0 {
		rs.OutageMarginDB = DefaultOutageMarginDB
	}
	if rs.DistanceBins == 0 {
		rs.DistanceBins = DefaultDistanceBins
	}
	if rs.Batches == 0 {
		rs.Batches = DefaultBatches
	}
	sc.normaliseLayout()
}

// TotalSlots is the number of slots per replication, warm-up included:
// run.slots, or round(duration_s · update_rate_hz) when slots is 0.
// It returns 0 when neither is usable.
func (sc Scenario) TotalSlots() int64 {
	if sc.Run.Slots > 0 {
		return sc.Run.Slots
	}
	x := sc.Run.DurationS * sc.InnerLoop.UpdateRateHz
	if !(x >= 1) || x > 1e12 {
		return 0
	}
	return int64(math.Round(x))
}

// Users is the total number of users over all groups (negative counts
// count as 0); in multi-cell mode every group's count is per cell, so the
// sum is multiplied by the layout's cells.
func (sc Scenario) Users() int {
	n := 0
	for _, g := range sc.Groups {
		if g.Count > 0 && g.Count < 1<<24 {
			n += g.Count
		}
	}
	return n * sc.Layout.Cells()
}

// ProcessingGain is G_p = chip_rate_hz / bit_rate_bps (linear).
func (r Receiver) ProcessingGain() float64 { return r.ChipRateHz / r.BitRateBps }

// NoiseDBm is the thermal noise power N = −174 dBm/Hz + 10·log10(chip_rate_hz)
// + noise_figure_db, in dBm.
func (r Receiver) NoiseDBm() float64 {
	return -174 + 10*math.Log10(r.ChipRateHz) + r.NoiseFigureDB
}

// DownStepDB is the outer loop's down step Δ_up·τ/(1−τ) in dB (the jump rule,
// Sampath, Kumar & Holtzman, IEEE VTC 1997).
func (o OuterLoop) DownStepDB() float64 {
	return o.UpStepDB * o.BLERTarget / (1 - o.BLERTarget)
}

// dbToLin is 10^(x/10).
func dbToLin(x float64) float64 { return math.Pow(10, x/10) }

// linToDB is 10·log10(x).
func linToDB(x float64) float64 { return 10 * math.Log10(x) }
