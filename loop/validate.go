package loop

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"github.com/fadeloop/fadeloop/fading"
)

// Violation is one broken rule of a Scenario: Field is the json-tag path of
// the offending value (e.g. `groups[1].speeds[0].speed_kmh`,
// `inner_loop.step_db`), the same path as in the fadeloop.v1 proto; Rule says
// what is wrong in plain words.
type Violation struct {
	Field string `json:"field"`
	Rule  string `json:"rule"`
}

// Violations is every broken rule of a Scenario, in field order. A nil or
// empty Violations means valid. It implements error.
type Violations []Violation

// Error lists every violation as "field: rule", separated by "; ".
func (v Violations) Error() string {
	parts := make([]string, len(v))
	for i, x := range v {
		parts[i] = x.Field + ": " + x.Rule
	}
	return strings.Join(parts, "; ")
}

// Err returns v as an error, or nil when there is no violation.
func (v Violations) Err() error {
	if len(v) == 0 {
		return nil
	}
	return v
}

// Limits of a Scenario that the proto rules share; the service's cost bound
// comes on top (see Cost).
const (
	MaxUsers         = 4096       // users over all groups
	MaxGroups        = 64         // groups
	MaxSlots         = 1000000000 // slots per replication
	MaxReplications  = 10000
	MaxFeedbackDelay = 1000
	MaxAveraging     = 1000
)

type checker struct{ v Violations }

func (c *checker) add(field, format string, args ...any) {
	c.v = append(c.v, Violation{Field: field, Rule: fmt.Sprintf(format, args...)})
}

func fin(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// enum reports an unset or unknown enum value, naming the allowed values.
func (c *checker) enum(field string, names []string, v int, extra string) {
	got := "unset"
	if v != 0 {
		got = enumString(names, v)
	}
	c.add(field, "must be one of %s%s, got %s", allowed(names), extra, got)
}

// rng checks lo <= x <= hi (finite).
func (c *checker) rng(field string, x, lo, hi float64, unit string) bool {
	if !fin(x) || x < lo || x > hi {
		c.add(field, "must be finite and in [%g, %g]%s, got %g", lo, hi, unit, x)
		return false
	}
	return true
}

// pos checks 0 < x <= hi (finite).
func (c *checker) pos(field string, x, hi float64, unit string) bool {
	if !fin(x) || x <= 0 || x > hi {
		c.add(field, "must be finite and in (0, %g]%s, got %g", hi, unit, x)
		return false
	}
	return true
}

// Validate checks every field and the semantic rules (Doppler of each speed
// below half the update rate, taps sorted, probabilities in range,
// exactly-one-of rules, path-loss validity over each group's distance range
// with package fading's models) and returns every violation at once, nil
// when the scenario is valid. Call Normalise first: Validate does not fill
// defaults, and reports unset values. It never panics.
func (sc Scenario) Validate() Violations {
	c := &checker{}
	if len(sc.Name) > 128 {
		c.add("name", "must be at most 128 characters, got %d", len(sc.Name))
	}
	r := sc.Receiver
	c.pos("receiver.chip_rate_hz", r.ChipRateHz, 1e10, " Hz")
	if c.pos("receiver.bit_rate_bps", r.BitRateBps, 1e10, " bit/s") && fin(r.ChipRateHz) && r.BitRateBps > r.ChipRateHz {
		c.add("receiver.bit_rate_bps", "must be at most chip_rate_hz (processing gain >= 1), got %g > %g", r.BitRateBps, r.ChipRateHz)
	}
	c.rng("receiver.noise_figure_db", r.NoiseFigureDB, 0, 30, " dB")
	c.rng("receiver.other_cell_ratio", r.OtherCellRatio, 0, 10, "")
	c.rng("receiver.sir_estimation_error_db", r.SIREstimationErrorDB, 0, 20, " dB")
	if r.SIRAveragingSlots < 1 || r.SIRAveragingSlots > MaxAveraging {
		c.add("receiver.sir_averaging_slots", "must be in [1, %d], got %d", MaxAveraging, r.SIRAveragingSlots)
	}
	if !defined(rakeFingersNames, int(r.RakeFingers)) {
		c.enum("receiver.rake_fingers", rakeFingersNames, int(r.RakeFingers), "")
	}
	if r.MaxFingers < 1 || r.MaxFingers > fading.MaxFingers {
		c.add("receiver.max_fingers", "must be in [1, %d], got %d", fading.MaxFingers, r.MaxFingers)
	}

	il := sc.InnerLoop
	rateOK := c.pos("inner_loop.update_rate_hz", il.UpdateRateHz, 1e5, " Hz")

	if len(sc.Groups) == 0 {
		c.add("groups", "must have at least one group")
	}
	if len(sc.Groups) > MaxGroups {
		c.add("groups", "must have at most %d groups, got %d", MaxGroups, len(sc.Groups))
	}
	total := 0
	for i, g := range sc.Groups {
		c.group(fmt.Sprintf("groups[%d]", i), g, il.UpdateRateHz, rateOK, sc.MultiCell())
		if g.Count > 0 {
			total += min(g.Count, MaxUsers+1)
		}
	}
	if total > MaxUsers {
		c.add("groups", "must have at most %d users in total, got %d", MaxUsers, total)
	}

	c.inner(il)
	c.outer(sc.OuterLoop)
	c.link(sc.Link)
	c.run(sc)
	if sc.MultiCell() {
		c.validateLayout(sc)
	}
	return c.v
}

func (c *checker) group(p string, g UserGroup, rateHz float64, rateOK, multiCell bool) {
	if len(g.Name) > 64 {
		c.add(p+".name", "must be at most 64 characters, got %d", len(g.Name))
	}
	countOK := true
	if g.Count < 1 || g.Count > MaxUsers {
		c.add(p+".count", "must be in [1, %d], got %d", MaxUsers, g.Count)
		countOK = false
	}
	// Placement and the distance range it implies.
	dmin, dmax := math.NaN(), math.NaN()
	placement := g.Placement
	if multiCell && placement == PlacementUnspecified && len(g.DistancesM) == 0 && g.MinDistanceM == 0 && g.MaxDistanceM == 0 {
		placement = -1 // users are dropped in every cell of the layout
	}
	switch placement {
	case -1:
	case PlacementExplicit:
		if countOK && len(g.DistancesM) != g.Count {
			c.add(p+".distances_m", "must list exactly count (%d) distances for PLACEMENT_EXPLICIT, got %d", g.Count, len(g.DistancesM))
		}
		ok := len(g.DistancesM) > 0
		for j, d := range g.DistancesM {
			if !c.pos(fmt.Sprintf("%s.distances_m[%d]", p, j), d, 1e6, " m") {
				ok = false
			}
		}
		if ok {
			dmin, dmax = math.Inf(1), math.Inf(-1)
			for _, d := range g.DistancesM {
				dmin, dmax = math.Min(dmin, d), math.Max(dmax, d)
			}
		}
		if g.MinDistanceM != 0 || g.MaxDistanceM != 0 {
			c.add(p+".min_distance_m", "must be unset for PLACEMENT_EXPLICIT (exactly one of distances_m and min/max_distance_m)")
		}
	case PlacementUniformDistance, PlacementUniformArea:
		if len(g.DistancesM) > 0 {
			c.add(p+".distances_m", "must be empty unless placement is PLACEMENT_EXPLICIT (exactly one of distances_m and min/max_distance_m)")
		}
		a := c.pos(p+".min_distance_m", g.MinDistanceM, 1e6, " m")
		b := c.pos(p+".max_distance_m", g.MaxDistanceM, 1e6, " m")
		if a && b {
			if g.MinDistanceM > g.MaxDistanceM {
				c.add(p+".max_distance_m", "must be >= min_distance_m (%g m), got %g", g.MinDistanceM, g.MaxDistanceM)
			} else {
				dmin, dmax = g.MinDistanceM, g.MaxDistanceM
			}
		}
	default:
		c.enum(p+".placement", placementNames, int(g.Placement), " (or leave it unset with distances_m or max_distance_m given)")
	}

	carrierOK := c.rng(p+".carrier_frequency_hz", g.CarrierFrequencyHz, 1e6, 1e11, " Hz")
	if len(g.Speeds) == 0 {
		c.add(p+".speeds", "must have at least one speed")
	}
	if len(g.Speeds) > 16 {
		c.add(p+".speeds", "must have at most 16 speeds, got %d", len(g.Speeds))
	}
	for j, s := range g.Speeds {
		sp := fmt.Sprintf("%s.speeds[%d]", p, j)
		if c.rng(sp+".speed_kmh", s.SpeedKmh, 0, 1000, " km/h") && carrierOK && rateOK {
			fd := fading.DopplerHz(s.SpeedKmh, g.CarrierFrequencyHz)
			if err := fading.CheckDoppler(fd, rateHz); err != nil {
				c.add(sp+".speed_kmh", "Doppler %.4g Hz at %g km/h and %g Hz carrier must be below half the update rate (%g Hz)",
					fd, s.SpeedKmh, g.CarrierFrequencyHz, rateHz/2)
			}
		}
		c.pos(sp+".weight", s.Weight, 1e6, "")
	}

	// Exactly one of profile and custom_taps.
	switch {
	case g.Profile != "" && len(g.CustomTaps) > 0:
		c.add(p+".profile", "exactly one of profile and custom_taps must be set, got both")
	case g.Profile == "" && len(g.CustomTaps) == 0:
		c.add(p+".profile", "exactly one of profile and custom_taps must be set, got neither")
	case g.Profile != "":
		if _, err := fading.BuiltinProfile(g.Profile); err != nil {
			c.add(p+".profile", "unknown profile %q; built-in profiles are %s", g.Profile, strings.Join(fading.BuiltinProfileNames(), ", "))
		}
	default:
		if len(g.CustomTaps) > fading.MaxTaps {
			c.add(p+".custom_taps", "must have at most %d taps, got %d", fading.MaxTaps, len(g.CustomTaps))
		}
		for j, t := range g.CustomTaps {
			tp := fmt.Sprintf("%s.custom_taps[%d]", p, j)
			if c.rng(tp+".delay_ns", t.DelayNs, 0, 1e6, " ns") && j > 0 {
				prev := g.CustomTaps[j-1].DelayNs
				if fin(prev) && t.DelayNs <= prev {
					c.add(tp+".delay_ns", "taps must be sorted by strictly ascending delay, got %g ns after %g ns", t.DelayNs, prev)
				}
			}
			c.rng(tp+".power_db", t.PowerDB, -100, 50, " dB")
		}
	}
	if g.LOS {
		c.rng(p+".rician_k_db", g.RicianKDB, -50, 50, " dB")
	} else if !fin(g.RicianKDB) {
		c.add(p+".rician_k_db", "must be finite, got %g", g.RicianKDB)
	}
	if g.Sinusoids < 0 || g.Sinusoids > fading.MaxSinusoids {
		c.add(p+".sinusoids", "must be in [0, %d] (0 = generator default), got %d", fading.MaxSinusoids, g.Sinusoids)
	}
	if !defined(generatorNames, int(g.Generator)) {
		c.enum(p+".generator", generatorNames, int(g.Generator), "")
	}
	if c.rng(p+".shadowing_sigma_db", g.ShadowingSigmaDB, 0, 20, " dB") && g.ShadowingSigmaDB > 0 {
		c.pos(p+".shadowing_decorrelation_m", g.ShadowingDecorrelationM, 1e5, " m")
	} else if !fin(g.ShadowingDecorrelationM) || g.ShadowingDecorrelationM < 0 {
		c.add(p+".shadowing_decorrelation_m", "must be finite and >= 0 m, got %g", g.ShadowingDecorrelationM)
	}

	c.pathLoss(p+".path_loss", g.PathLoss, g.CarrierFrequencyHz, carrierOK, dmin, dmax)

	if !fin(g.ActivityFactor) || g.ActivityFactor <= 0 || g.ActivityFactor > 1 {
		c.add(p+".activity_factor", "must be in (0, 1], got %g", g.ActivityFactor)
	} else if g.ActivityFactor < 1 {
		if !fin(g.MeanBurstSlots) || g.MeanBurstSlots < 1 || g.MeanBurstSlots > 1e7 {
			c.add(p+".mean_burst_slots", "must be in [1, 1e7] slots when activity_factor < 1, got %g", g.MeanBurstSlots)
		} else if off := g.MeanBurstSlots * (1 - g.ActivityFactor) / g.ActivityFactor; off < 1 {
			c.add(p+".mean_burst_slots", "gives a mean off period of %.3g slots with activity_factor %g; it must be >= 1 slot (raise mean_burst_slots)", off, g.ActivityFactor)
		}
	} else if !fin(g.MeanBurstSlots) || g.MeanBurstSlots < 0 {
		c.add(p+".mean_burst_slots", "must be finite and >= 0, got %g", g.MeanBurstSlots)
	}
}

// pathLossModel builds the fading model of a group's path loss.
func pathLossModel(pl PathLoss, carrierHz float64) (fading.PathLoss, error) {
	switch pl.Model {
	case PathLossFreeSpace:
		return fading.FreeSpace{CarrierHz: carrierHz}, nil
	case PathLossLogDistance:
		return fading.LogDistance{RefDistanceM: pl.RefDistanceM, RefLossDB: pl.RefLossDB, Exponent: pl.Exponent}, nil
	case PathLossHataUrban, PathLossHataUrbanLarge, PathLossHataSuburban, PathLossHataOpen:
		env := map[PathLossModel]fading.HataEnvironment{
			PathLossHataUrban: fading.HataUrban, PathLossHataUrbanLarge: fading.HataUrbanLarge,
			PathLossHataSuburban: fading.HataSuburban, PathLossHataOpen: fading.HataOpen,
		}[pl.Model]
		return fading.Hata{CarrierHz: carrierHz, BaseHeightM: pl.BaseHeightM, MobileHeightM: pl.MobileHeightM, Environment: env}, nil
	case PathLossCOST231Hata, PathLossCOST231HataMetro:
		return fading.COST231Hata{CarrierHz: carrierHz, BaseHeightM: pl.BaseHeightM, MobileHeightM: pl.MobileHeightM,
			Metropolitan: pl.Model == PathLossCOST231HataMetro}, nil
	}
	return nil, fmt.Errorf("unknown path-loss model %s", pl.Model)
}

// fieldOf maps a fading parameter name to the scenario field name.
func plField(err error) string {
	var pe *fading.ParamError
	if errors.As(err, &pe) {
		switch pe.Param {
		case "RefDistanceM":
			return "ref_distance_m"
		case "RefLossDB":
			return "ref_loss_db"
		case "Exponent":
			return "exponent"
		case "BaseHeightM":
			return "base_height_m"
		case "MobileHeightM":
			return "mobile_height_m"
		}
	}
	return "model"
}

func (c *checker) pathLoss(p string, pl PathLoss, carrierHz float64, carrierOK bool, dmin, dmax float64) {
	if !defined(pathLossNames, int(pl.Model)) {
		c.enum(p+".model", pathLossNames, int(pl.Model), "")
		return
	}
	for _, f := range []struct {
		name string
		x    float64
	}{{"ref_distance_m", pl.RefDistanceM}, {"ref_loss_db", pl.RefLossDB}, {"exponent", pl.Exponent},
		{"base_height_m", pl.BaseHeightM}, {"mobile_height_m", pl.MobileHeightM}} {
		if !fin(f.x) || f.x < 0 {
			c.add(p+"."+f.name, "must be finite and >= 0, got %g", f.x)
			return
		}
	}
	if !carrierOK {
		return
	}
	m, err := pathLossModel(pl, carrierHz)
	if err == nil {
		err = m.Validate()
	}
	if err != nil {
		c.add(p+"."+plField(err), "%v", err)
		return
	}
	if math.IsNaN(dmin) {
		return
	}
	for _, d := range []float64{dmin, dmax} {
		if _, err := m.LossDB(d); err != nil {
			c.add(p+".model", "not valid for the group's distance %g m: %v", d, err)
			return
		}
	}
}

func (c *checker) inner(il InnerLoop) {
	const p = "inner_loop"
	if !defined(innerModeNames, int(il.Mode)) {
		c.enum(p+".mode", innerModeNames, int(il.Mode), "")
	}
	if !defined(commandNames, int(il.Command)) {
		c.enum(p+".command", commandNames, int(il.Command), "")
	}
	c.pos(p+".step_db", il.StepDB, 10, " dB")
	if il.Mode == InnerModeClosedLoop && il.Command == CommandMultiLevel {
		n := len(il.LevelsDB)
		if n < 2 || n > 16 {
			c.add(p+".levels_db", "must have 2 to 16 levels for COMMAND_MULTI_LEVEL, got %d", n)
		}
		for j, x := range il.LevelsDB {
			f := fmt.Sprintf("%s.levels_db[%d]", p, j)
			if c.rng(f, x, -20, 20, " dB") && j > 0 && fin(il.LevelsDB[j-1]) && x <= il.LevelsDB[j-1] {
				c.add(f, "levels must be strictly ascending, got %g after %g", x, il.LevelsDB[j-1])
			}
		}
		if n >= 2 && len(il.ThresholdsDB) != n-1 {
			c.add(p+".thresholds_db", "must have len(levels_db)-1 = %d thresholds, got %d", n-1, len(il.ThresholdsDB))
		}
		for j, x := range il.ThresholdsDB {
			f := fmt.Sprintf("%s.thresholds_db[%d]", p, j)
			if c.rng(f, x, -50, 50, " dB") && j > 0 && fin(il.ThresholdsDB[j-1]) && x <= il.ThresholdsDB[j-1] {
				c.add(f, "thresholds must be strictly ascending, got %g after %g", x, il.ThresholdsDB[j-1])
			}
		}
	}
	if il.FeedbackDelaySlots < 0 || il.FeedbackDelaySlots > MaxFeedbackDelay {
		c.add(p+".feedback_delay_slots", "must be in [0, %d] slots, got %d", MaxFeedbackDelay, il.FeedbackDelaySlots)
	}
	c.rng(p+".command_error_prob", il.CommandErrorProb, 0, 0.5, "")
	a := c.rng(p+".min_power_dbm", il.MinPowerDBm, -100, 60, " dBm")
	b := c.rng(p+".max_power_dbm", il.MaxPowerDBm, -100, 60, " dBm")
	limitsOK := a && b
	if limitsOK && il.MinPowerDBm >= il.MaxPowerDBm {
		c.add(p+".max_power_dbm", "must be above min_power_dbm (%g dBm), got %g", il.MinPowerDBm, il.MaxPowerDBm)
		limitsOK = false
	}
	if !defined(initialPowerNames, int(il.InitialPower)) {
		c.enum(p+".initial_power", initialPowerNames, int(il.InitialPower), "")
	}
	inLimits := func(field string, x float64) {
		if !fin(x) {
			c.add(field, "must be finite, got %g", x)
		} else if limitsOK && (x < il.MinPowerDBm || x > il.MaxPowerDBm) {
			c.add(field, "must be within [min_power_dbm, max_power_dbm] = [%g, %g] dBm, got %g", il.MinPowerDBm, il.MaxPowerDBm, x)
		}
	}
	if il.InitialPower == InitialPowerFixed {
		inLimits(p+".initial_power_dbm", il.InitialPowerDBm)
	} else if !fin(il.InitialPowerDBm) {
		c.add(p+".initial_power_dbm", "must be finite, got %g", il.InitialPowerDBm)
	}
	if il.Mode == InnerModeFixedPower {
		inLimits(p+".fixed_power_dbm", il.FixedPowerDBm)
	} else if !fin(il.FixedPowerDBm) {
		c.add(p+".fixed_power_dbm", "must be finite, got %g", il.FixedPowerDBm)
	}
}

func (c *checker) outer(o OuterLoop) {
	const p = "outer_loop"
	if !fin(o.BLERTarget) || o.BLERTarget <= 0 || o.BLERTarget >= 1 {
		c.add(p+".bler_target", "must be in (0, 1), got %g", o.BLERTarget)
	}
	if o.BlockSlots < 1 || o.BlockSlots > 100000 {
		c.add(p+".block_slots", "must be in [1, 100000], got %d", o.BlockSlots)
	}
	c.pos(p+".up_step_db", o.UpStepDB, 10, " dB")
	a := c.rng(p+".min_target_db", o.MinTargetDB, -30, 50, " dB")
	b := c.rng(p+".max_target_db", o.MaxTargetDB, -30, 50, " dB")
	if a && b && o.MinTargetDB > o.MaxTargetDB {
		c.add(p+".max_target_db", "must be >= min_target_db (%g dB), got %g", o.MinTargetDB, o.MaxTargetDB)
		a = false
	}
	if c.rng(p+".initial_target_db", o.InitialTargetDB, -30, 50, " dB") && o.Enabled && a && b &&
		(o.InitialTargetDB < o.MinTargetDB || o.InitialTargetDB > o.MaxTargetDB) {
		c.add(p+".initial_target_db", "must be within [min_target_db, max_target_db] = [%g, %g] dB, got %g", o.MinTargetDB, o.MaxTargetDB, o.InitialTargetDB)
	}
}

func (c *checker) link(l LinkCurve) {
	const p = "link"
	switch l.Kind {
	case LinkLogistic:
		c.rng(p+".threshold_db", l.ThresholdDB, -30, 50, " dB")
		c.pos(p+".slope_db", l.SlopeDB, 20, " dB")
	case LinkTable:
		if len(l.Table) < 2 || len(l.Table) > 256 {
			c.add(p+".table", "must have 2 to 256 points for LINK_KIND_TABLE, got %d", len(l.Table))
		}
		for j, pt := range l.Table {
			f := fmt.Sprintf("%s.table[%d]", p, j)
			okS := c.rng(f+".sir_db", pt.SIRDB, -50, 60, " dB")
			okB := c.rng(f+".bler", pt.BLER, 0, 1, "")
			if j > 0 {
				q := l.Table[j-1]
				if okS && fin(q.SIRDB) && pt.SIRDB <= q.SIRDB {
					c.add(f+".sir_db", "table SIRs must be strictly ascending, got %g after %g", pt.SIRDB, q.SIRDB)
				}
				if okB && fin(q.BLER) && pt.BLER > q.BLER {
					c.add(f+".bler", "table BLERs must be non-increasing, got %g after %g", pt.BLER, q.BLER)
				}
			}
		}
	default:
		c.enum(p+".kind", linkKindNames, int(l.Kind), "")
	}
	if !defined(effectiveNames, int(l.EffectiveSIR)) {
		c.enum(p+".effective_sir", effectiveNames, int(l.EffectiveSIR), "")
	}
	c.pos(p+".eesm_beta", l.EESMBeta, 1000, "")
}

func (c *checker) run(sc Scenario) {
	const p = "run"
	r := sc.Run
	hasSlots, hasDur := r.Slots != 0, r.DurationS != 0
	switch {
	case hasSlots && hasDur:
		c.add(p+".slots", "exactly one of slots and duration_s must be set, got both")
	case !hasSlots && !hasDur:
		c.add(p+".slots", "exactly one of slots and duration_s must be set, got neither")
	case hasSlots:
		if r.Slots < 1 || r.Slots > MaxSlots {
			c.add(p+".slots", "must be in [1, %d], got %d", MaxSlots, r.Slots)
		}
	default:
		if c.pos(p+".duration_s", r.DurationS, 1e6, " s") && fin(sc.InnerLoop.UpdateRateHz) && sc.InnerLoop.UpdateRateHz > 0 {
			n := r.DurationS * sc.InnerLoop.UpdateRateHz
			if n < 1 || n > MaxSlots {
				c.add(p+".duration_s", "gives %.4g slots at %g Hz; must give 1 to %d slots", n, sc.InnerLoop.UpdateRateHz, MaxSlots)
			}
		}
	}
	total := sc.TotalSlots()
	if r.WarmupSlots < 0 {
		c.add(p+".warmup_slots", "must be >= 0, got %d", r.WarmupSlots)
	} else if total > 0 && r.WarmupSlots >= total {
		c.add(p+".warmup_slots", "must be below the run length (%d slots), got %d", total, r.WarmupSlots)
	}
	if r.Replications < 1 || r.Replications > MaxReplications {
		c.add(p+".replications", "must be in [1, %d], got %d", MaxReplications, r.Replications)
	}
	c.rng(p+".outage_margin_db", r.OutageMarginDB, 0, 30, " dB")
	if r.DistanceBins < 1 || r.DistanceBins > 64 {
		c.add(p+".distance_bins", "must be in [1, 64], got %d", r.DistanceBins)
	}
	if r.Batches < 20 || r.Batches > 10000 {
		c.add(p+".batches", "must be in [20, 10000] (batch means need >= 20 batches), got %d", r.Batches)
	} else if total > 0 && r.WarmupSlots >= 0 && r.WarmupSlots < total && total-r.WarmupSlots < int64(r.Batches) {
		c.add(p+".batches", "must not exceed the measured slots (%d), got %d", total-r.WarmupSlots, r.Batches)
	}
}

// Cost is the work of a run in tap-user-slots: Σ_groups count × fingers ×
// slots × replications (slots warm-up included; fingers as simulated, see
// Receiver.RakeFingers; in multi-cell mode × cells × max_active legs), the users × slots × taps bound the service
// enforces. It saturates at math.MaxInt64 and never panics; an invalid
// scenario may give any value.
func (sc Scenario) Cost() int64 {
	tapUsers := 0.0
	for i, g := range sc.Groups {
		n := len(groupProfile(sc, i).Taps)
		if g.Count > 0 {
			tapUsers += float64(g.Count) * float64(max(n, 1))
		}
	}
	x := tapUsers * float64(sc.TotalSlots()) * float64(max(sc.Run.Replications, 1))
	if sc.MultiCell() {
		// Every cell's users, each with up to max_active faded legs.
		x *= float64(sc.Layout.Cells()) * float64(max(sc.Layout.Handover.MaxActive, 1))
	}
	if x >= math.MaxInt64 {
		return math.MaxInt64
	}
	return int64(x)
}
