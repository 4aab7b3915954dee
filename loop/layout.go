package loop

import (
	"fmt"
	"math"
)

// Layout turns a Scenario into a multi-cell run: a hexagonal layout of
// sites in which every cell's receiver sees every user, so that the
// other-cell interference ratio, the noise rise of each cell and the outage
// at the cell edge are simulated instead of assumed (Receiver.OtherCellRatio
// must then be 0). Sites 0 (unset) is the single-cell mode.
//
// In multi-cell mode the rest of the Scenario keeps its meaning where the
// concept is the same: groups[i].count is the users per cell of group i
// (dropped uniformly in every cell), groups[i].speeds (one speed),
// profile and carrier_frequency_hz (the same in every group) set the
// fading; the receiver is every cell's receiver (its RAKE finger settings
// included); inner_loop (CLOSED_LOOP with FIXED_STEP, or IDEAL) runs in
// every cell of a user's active set; outer_loop, link (LOGISTIC), and run
// (batches at most 1000, replications at most 1000) as in one cell. The
// engine is package loop/multicell, reached through multicell.RunScenario.
type Layout struct {
	Sites              int               `json:"sites"`                 // 0: single cell; else 1, 7 or 19 hexagonal sites
	SectorsPerSite     int               `json:"sectors_per_site"`      // 1 (omni) or 3 (antenna −min(12(θ/70°)², 20) dB, 3GPP TR 36.942 (memory)); 0 means 1
	InterSiteDistanceM float64           `json:"inter_site_distance_m"` // D in m, [50, 100000]; 0 means DefaultInterSiteDistanceM
	WrapAround         bool              `json:"wrap_around"`           // distances to the nearest image of each site (7 or 19 sites), so every cell has full rings of neighbours
	Propagation        LayoutPropagation `json:"propagation"`           // path loss, shadowing and fast fading toward every site
	Handover           Handover          `json:"handover"`              // active set (soft handover)
	OpenLoop           OpenLoopSetting   `json:"open_loop"`             // optional open-loop power setting under the closed loop
}

// LayoutPropagation is the propagation toward every site: log-distance
// path loss L = loss_at_1km_db + 10·n·log10(d / 1 km) for
// d ≥ min_distance_m, log-normal shadowing σ = shadowing_db correlated
// between sites with coefficient site_correlation (s_k = √ρ·a + √(1−ρ)·b_k)
// and in distance travelled (Gudmundson, decorrelation_m), updated every
// shadowing_slots slots (0: ShadowingSlotsFor, an update each
// decorrelation_m/100 travelled by the fastest group).
type LayoutPropagation struct {
	PathLossExponent float64    `json:"path_loss_exponent"` // n, [2, 6]; 0 means 3.76 (3GPP TR 25.942 (memory))
	LossAt1kmDB      float64    `json:"loss_at_1km_db"`     // [60, 200] dB; 0 means 128.1 (3GPP TR 25.942, 2 GHz (memory))
	MinDistanceM     float64    `json:"min_distance_m"`     // [1, min(1000, D/4)] m; 0 means DefaultMinDistanceM
	ShadowingDB      float64    `json:"shadowing_db"`       // σ in dB, [0, 20]; 0: no shadowing
	SiteCorrelation  float64    `json:"site_correlation"`   // ρ between sites, [0, 1] (0.5 is common practice)
	DecorrelationM   float64    `json:"decorrelation_m"`    // Gudmundson distance in m, (0, 10000]; 0 means DefaultDecorrelationM
	ShadowingSlots   int        `json:"shadowing_slots"`    // slots between shadowing updates, [1, 10000]; 0 means ShadowingSlotsFor (90 at 30 km/h, 50 m, 1500 Hz)
	FastFading       FastFading `json:"fast_fading"`        // which links fade; default SLOW_TOWARD_OTHERS
}

// Handover is the active set: the cells whose slow gain is within window_db
// of the best; a cell joins within window_db − hysteresis_db/2 and leaves
// below window_db + hysteresis_db/2 (3GPP TS 25.331 events 1A/1B (memory)),
// at most max_active cells, re-evaluated every update_slots slots.
// max_active 1 with window 0 is hard handover to the best cell.
type Handover struct {
	WindowDB     float64 `json:"window_db"`     // [0, 20] dB (3 is common practice)
	HysteresisDB float64 `json:"hysteresis_db"` // [0, 10] dB
	MaxActive    int     `json:"max_active"`    // [1, 6]; 0 means 3
	UpdateSlots  int     `json:"update_slots"`  // [1, 100000]; 0 means 300 (200 ms at 1500 Hz)
}

// OpenLoopSetting is open-loop power control under the closed loop: the
// user sets P = target + I0_est − G_est from its estimate G_est of the slow
// gain to its best cell (true gain plus a log-normal error of
// estimation_error_db, delay_slots old) and I0_est the thermal noise plus
// assumed_noise_rise_db; the closed loop adds its corrections on top.
type OpenLoopSetting struct {
	Enabled            bool    `json:"enabled"`
	EstimationErrorDB  float64 `json:"estimation_error_db"`   // [0, 20] dB
	DelaySlots         int     `json:"delay_slots"`           // [0, 100000]
	AssumedNoiseRiseDB float64 `json:"assumed_noise_rise_db"` // [0, 30] dB; 0 means 3 (common practice)
}

// FastFading selects which links of a multi-cell layout fade.
type FastFading int

// Fast-fading modes.
const (
	FastFadingUnspecified      FastFading = iota // not set; Normalise makes it SLOW_TOWARD_OTHERS
	FastFadingNone                               // path loss and shadowing only
	FastFadingSlowTowardOthers                   // Rayleigh fading on the active-set links, slow gain toward the other cells (their users' fading averages out)
	FastFadingFull                               // every link fades (small layouts: users × cells ≤ 8192)
)

var fastFadingNames = []string{"FAST_FADING_UNSPECIFIED", "FAST_FADING_NONE", "FAST_FADING_SLOW_TOWARD_OTHERS", "FAST_FADING_FULL"}

// String returns the proto value name of the FastFading.
func (v FastFading) String() string { return enumString(fastFadingNames, int(v)) }

// MarshalText encodes the FastFading as its proto value name.
func (v FastFading) MarshalText() ([]byte, error) { return []byte(v.String()), nil }

// UnmarshalText accepts the proto value name or its number.
func (v *FastFading) UnmarshalText(b []byte) error {
	x, err := enumParse(fastFadingNames, "fast-fading mode", b)
	*v = FastFading(x)
	return err
}

// Multi-cell defaults filled by Normalise when layout.sites is set.
const (
	DefaultInterSiteDistanceM = 1000  // urban macro inter-site distance (common practice)
	DefaultLayoutExponent     = 3.76  // 3GPP TR 25.942 macro path loss 128.1 + 37.6 log10(d/1 km) (memory)
	DefaultLayoutLossAt1kmDB  = 128.1 // same model, 2 GHz
	DefaultMaxActive          = 3     // active-set size (common practice)
	DefaultHandoverSlots      = 300   // 200 ms at 1500 Hz (common practice)
	DefaultAssumedNoiseRiseDB = 3     // open-loop noise-rise assumption (common practice)
)

// MultiCell reports whether the scenario runs in multi-cell mode.
func (sc Scenario) MultiCell() bool { return sc.Layout.Sites != 0 }

// Cells is the number of cells of the layout (sites × sectors), 1 in
// single-cell mode.
func (l Layout) Cells() int {
	if l.Sites <= 0 {
		return 1
	}
	s := l.SectorsPerSite
	if s <= 0 {
		s = 1
	}
	if l.Sites > 19 || s > 3 {
		return 19 * 3
	}
	return l.Sites * s
}

// normaliseLayout fills the multi-cell defaults (only when sites is set).
func (sc *Scenario) normaliseLayout() {
	l := &sc.Layout
	if l.Sites == 0 {
		return
	}
	if l.SectorsPerSite == 0 {
		l.SectorsPerSite = 1
	}
	if l.InterSiteDistanceM == 0 {
		l.InterSiteDistanceM = DefaultInterSiteDistanceM
	}
	p := &l.Propagation
	if p.PathLossExponent == 0 {
		p.PathLossExponent = DefaultLayoutExponent
	}
	if p.LossAt1kmDB == 0 {
		p.LossAt1kmDB = DefaultLayoutLossAt1kmDB
	}
	if p.MinDistanceM == 0 {
		p.MinDistanceM = DefaultMinDistanceM
	}
	if p.DecorrelationM == 0 {
		p.DecorrelationM = DefaultDecorrelationM
	}
	if p.ShadowingSlots == 0 {
		p.ShadowingSlots = ShadowingSlotsFor(p.DecorrelationM, sc.fastestKmh(), sc.InnerLoop.UpdateRateHz)
	}
	if p.FastFading == FastFadingUnspecified {
		p.FastFading = FastFadingSlowTowardOthers
	}
	if l.Handover.MaxActive == 0 {
		l.Handover.MaxActive = DefaultMaxActive
	}
	if l.Handover.UpdateSlots == 0 {
		l.Handover.UpdateSlots = DefaultHandoverSlots
	}
	if l.OpenLoop.AssumedNoiseRiseDB == 0 {
		l.OpenLoop.AssumedNoiseRiseDB = DefaultAssumedNoiseRiseDB
	}
}

// Shadowing update spacing when shadowing_slots is 0 (ShadowingSlotsFor).
const (
	// ShadowingStepsPerDecorrelation: updates per decorrelation distance
	// travelled. The AR(1) update s' = k·s + √(1−k²)·w with
	// k = exp(−Δd/d_c) samples the Gudmundson process exactly at the
	// updates; between them the value is held, and the held value's step
	// has standard deviation σ·√(2(1−e^(−1/100))) = 0.141σ (1.1 dB at
	// σ = 8 dB), small beside one inner-loop step per slot (common
	// practice: a small fraction of the decorrelation distance).
	ShadowingStepsPerDecorrelation = 100
	// MaxDefaultShadowingSlots bounds the default interval (1 s at
	// 1500 Hz; also the interval when no group moves).
	MaxDefaultShadowingSlots = 1500
)

// ShadowingSlotsFor is the default shadowing update interval in slots: the
// slots the fastest group (fastestKmh, km/h) takes to travel
// decorrelationM/ShadowingStepsPerDecorrelation metres at rateHz slots per
// second, rounded down, in [1, MaxDefaultShadowingSlots]. 30 km/h, 50 m,
// 1500 Hz: 0.5 m / 8.33 m/s = 60 ms = 90 slots.
func ShadowingSlotsFor(decorrelationM, fastestKmh, rateHz float64) int {
	if fastestKmh <= 0 || decorrelationM <= 0 || rateHz <= 0 {
		return MaxDefaultShadowingSlots
	}
	s := decorrelationM / ShadowingStepsPerDecorrelation / (fastestKmh / 3.6) * rateHz
	return int(math.Max(1, math.Min(MaxDefaultShadowingSlots, math.Floor(s))))
}

// fastestKmh is the highest speed in any group's speed mix, in km/h.
func (sc *Scenario) fastestKmh() float64 {
	v := 0.0
	for _, g := range sc.Groups {
		for _, s := range g.Speeds {
			v = math.Max(v, s.SpeedKmh)
		}
	}
	return v
}

// validateLayout checks what a multi-cell scenario cannot use. The ranges
// of the layout's own fields are checked by the multi-cell engine
// (multicell.FromScenario), with the same field paths.
func (c *checker) validateLayout(sc Scenario) {
	l := sc.Layout
	switch l.Sites {
	case 1, 7, 19:
	default:
		c.add("layout.sites", "must be 0 (single cell) or one of 1, 7, 19, got %d", l.Sites)
	}
	if l.SectorsPerSite != 1 && l.SectorsPerSite != 3 {
		c.add("layout.sectors_per_site", "must be 1 or 3, got %d", l.SectorsPerSite)
	}
	if !defined(fastFadingNames, int(l.Propagation.FastFading)) || l.Propagation.FastFading == FastFadingUnspecified {
		c.enum("layout.propagation.fast_fading", fastFadingNames, int(l.Propagation.FastFading), "")
	}
	const why = " in multi-cell mode (layout.sites set)"
	if sc.Receiver.OtherCellRatio != 0 {
		c.add("receiver.other_cell_ratio", "must be 0%s: other-cell interference is simulated, got %g", why, sc.Receiver.OtherCellRatio)
	}
	if sc.Receiver.SIRAveragingSlots > 1 {
		c.add("receiver.sir_averaging_slots", "must be 1%s, got %d", why, sc.Receiver.SIRAveragingSlots)
	}
	for i, g := range sc.Groups {
		p := fmt.Sprintf("groups[%d]", i)
		if len(g.Speeds) > 1 {
			c.add(p+".speeds", "must have exactly one speed%s, got %d", why, len(g.Speeds))
		}
		if g.Placement != PlacementUnspecified || len(g.DistancesM) > 0 || g.MaxDistanceM != 0 || g.MinDistanceM != 0 {
			c.add(p+".placement", "must be unset with no distances%s: users are dropped uniformly in every cell", why)
		}
		if len(g.CustomTaps) > 0 {
			c.add(p+".custom_taps", "must be empty%s: use a built-in profile", why)
		}
		if g.LOS {
			c.add(p+".los", "must be false%s (Rayleigh legs)", why)
		}
		if g.Generator != GeneratorDefault && g.Generator != GeneratorUnspecified {
			c.add(p+".generator", "must be GENERATOR_DEFAULT%s, got %s", why, g.Generator)
		}
		if g.ActivityFactor != 1 && g.ActivityFactor != 0 {
			c.add(p+".activity_factor", "must be 1%s, got %g", why, g.ActivityFactor)
		}
		if g.ShadowingSigmaDB != 0 {
			c.add(p+".shadowing_sigma_db", "must be 0%s: set layout.propagation.shadowing_db", why)
		}
		if g.CarrierFrequencyHz != sc.Groups[0].CarrierFrequencyHz {
			c.add(p+".carrier_frequency_hz", "must equal groups[0].carrier_frequency_hz%s, got %g", why, g.CarrierFrequencyHz)
		}
	}
	il := sc.InnerLoop
	switch il.Mode {
	case InnerModeClosedLoop:
		if il.Command != CommandFixedStep {
			c.add("inner_loop.command", "must be COMMAND_FIXED_STEP%s, got %s", why, il.Command)
		}
	case InnerModeIdeal:
	default:
		c.add("inner_loop.mode", "must be INNER_MODE_CLOSED_LOOP or INNER_MODE_IDEAL%s, got %s", why, il.Mode)
	}
	if sc.Link.Kind != LinkLogistic {
		c.add("link.kind", "must be LINK_KIND_LOGISTIC%s, got %s", why, sc.Link.Kind)
	}
	if sc.Link.EffectiveSIR == EffectiveSIREESM {
		c.add("link.effective_sir", "must be EFFECTIVE_SIR_LINEAR_MEAN%s", why)
	}
	if sc.Run.Batches > 1000 {
		c.add("run.batches", "must be at most 1000%s, got %d", why, sc.Run.Batches)
	}
	if sc.Run.Replications > 1000 {
		c.add("run.replications", "must be at most 1000%s, got %d", why, sc.Run.Replications)
	}
}
