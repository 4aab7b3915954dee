package loop

import (
	"fmt"
	"strconv"
	"strings"
)

// The enumerations of a Scenario. Each is a Go int whose zero value means
// "not set"; Normalise fills a documented default where one makes sense and
// Validate rejects what stays unset. Their text form (JSON, YAML, flags) is
// the name of the matching value of the fadeloop.v1 proto enum, e.g.
// "INNER_MODE_CLOSED_LOOP", so scenario files read the same in both.

// Placement says how the users of a group are placed around the receiver.
type Placement int

// Placements.
const (
	PlacementUnspecified     Placement = iota // not set; Normalise makes it EXPLICIT when distances_m is given, else UNIFORM_AREA when max_distance_m is
	PlacementExplicit                         // distances_m, one per user
	PlacementUniformDistance                  // evenly spread in distance between min and max, both included
	PlacementUniformArea                      // evenly spread in area over the annulus min..max
)

// Generator selects the fading generator of package fading.
type Generator int

// Generators.
const (
	GeneratorUnspecified    Generator = iota // not set; Normalise makes it GeneratorDefault
	GeneratorDefault                         // fading.GeneratorDefault
	GeneratorSumOfSinusoids                  // fading.GeneratorSumOfSinusoids (Zheng & Xiao 2003)
	GeneratorSpectral                        // fading.GeneratorSpectral (Young & Beaulieu 2000)
)

// PathLossModel selects the distance-dependent path-loss model of a group.
type PathLossModel int

// Path-loss models (all from package fading).
const (
	PathLossUnspecified      PathLossModel = iota // not set; Normalise makes it LOG_DISTANCE 52.9 + 37.6·log10(d/10 m) when no parameter is set
	PathLossFreeSpace                             // Friis free space at the carrier
	PathLossLogDistance                           // L = ref_loss_db + 10·exponent·log10(d/ref_distance_m)
	PathLossHataUrban                             // Okumura-Hata urban, small/medium city
	PathLossHataUrbanLarge                        // Okumura-Hata urban, large city
	PathLossHataSuburban                          // Okumura-Hata suburban
	PathLossHataOpen                              // Okumura-Hata open area
	PathLossCOST231Hata                           // COST-231 Hata, C_m = 0 dB
	PathLossCOST231HataMetro                      // COST-231 Hata metropolitan, C_m = 3 dB
)

// InnerMode is the inner-loop mode.
type InnerMode int

// Inner-loop modes.
const (
	InnerModeUnspecified InnerMode = iota // not set; Normalise makes it CLOSED_LOOP
	InnerModeFixedPower                   // no power control: every user at fixed_power_dbm (the baseline)
	InnerModeIdeal                        // every slot, the joint exact solution of SIR = target for all users (single receiver), within the power limits: the reference bound
	InnerModeClosedLoop                   // measured SIR vs target -> command -> delayed, possibly erroneous update
)

// Command is the closed-loop command type.
type Command int

// Command types.
const (
	CommandUnspecified Command = iota // not set; Normalise makes it FIXED_STEP
	CommandFixedStep                  // one bit: ±step_db (3GPP TS 25.214 §5.1.2.2 algorithm 1 (memory))
	CommandMultiLevel                 // one of levels_db chosen by thresholds_db (3GPP TS 36.213 §5.1.1.1 (memory))
	CommandAdaptive                   // one bit, step step_db·AdaptiveRatio^j, j in [AdaptiveMinExp, AdaptiveMaxExp] = [−2, 2], up on a repeat, down on a reversal (Jayant 1970 one-bit-memory adaptive delta modulation; see control.go)
)

// InitialPower says how a closed-loop user picks its first transmit power.
type InitialPower int

// Initial power rules.
const (
	InitialPowerUnspecified InitialPower = iota // not set; Normalise makes it OPEN_LOOP
	InitialPowerOpenLoop                        // open-loop estimate from the mean path loss, see Controller
	InitialPowerFixed                           // initial_power_dbm
)

// LinkKind is the kind of link curve.
type LinkKind int

// Link curve kinds.
const (
	LinkUnspecified LinkKind = iota // not set; Normalise makes it LOGISTIC
	LinkLogistic                    // BLER(s) = 1/(1+exp((s−threshold_db)/slope_db))
	LinkTable                       // piecewise linear in (SIR dB, log BLER) through table points
)

// EffectiveSIR is the rule that maps a block's per-slot SIRs to one
// effective SIR.
type EffectiveSIR int

// Effective-SIR rules.
const (
	EffectiveSIRUnspecified EffectiveSIR = iota // not set; Normalise makes it LINEAR_MEAN
	EffectiveSIRLinearMean                      // mean of the linear per-slot SIRs
	EffectiveSIREESM                            // exponential effective SIR mapping with eesm_beta
)

// RakeFingers says how the receiver turns a group's tap-delay profile into
// RAKE fingers.
type RakeFingers int

// RAKE finger models.
const (
	RakeFingersUnspecified   RakeFingers = iota // not set; Normalise makes it CHIP_RESOLVED
	RakeFingersChipResolved                     // taps less than one chip apart merge into one finger, at most max_fingers kept (fading.ResolveFingers)
	RakeFingersIdealEveryTap                    // ideal receiver: every tap is its own finger whatever the chip rate, no finger limit
)

var (
	rakeFingersNames = []string{"RAKE_FINGERS_UNSPECIFIED", "RAKE_FINGERS_CHIP_RESOLVED", "RAKE_FINGERS_IDEAL_EVERY_TAP"}
	placementNames   = []string{"PLACEMENT_UNSPECIFIED", "PLACEMENT_EXPLICIT", "PLACEMENT_UNIFORM_DISTANCE", "PLACEMENT_UNIFORM_AREA"}
	generatorNames   = []string{"GENERATOR_UNSPECIFIED", "GENERATOR_DEFAULT", "GENERATOR_SUM_OF_SINUSOIDS", "GENERATOR_SPECTRAL"}
	pathLossNames    = []string{"PATH_LOSS_MODEL_UNSPECIFIED", "PATH_LOSS_MODEL_FREE_SPACE", "PATH_LOSS_MODEL_LOG_DISTANCE",
		"PATH_LOSS_MODEL_HATA_URBAN", "PATH_LOSS_MODEL_HATA_URBAN_LARGE", "PATH_LOSS_MODEL_HATA_SUBURBAN",
		"PATH_LOSS_MODEL_HATA_OPEN", "PATH_LOSS_MODEL_COST231_HATA", "PATH_LOSS_MODEL_COST231_HATA_METRO"}
	innerModeNames    = []string{"INNER_MODE_UNSPECIFIED", "INNER_MODE_FIXED_POWER", "INNER_MODE_IDEAL", "INNER_MODE_CLOSED_LOOP"}
	commandNames      = []string{"COMMAND_UNSPECIFIED", "COMMAND_FIXED_STEP", "COMMAND_MULTI_LEVEL", "COMMAND_ADAPTIVE"}
	initialPowerNames = []string{"INITIAL_POWER_UNSPECIFIED", "INITIAL_POWER_OPEN_LOOP", "INITIAL_POWER_FIXED"}
	linkKindNames     = []string{"LINK_KIND_UNSPECIFIED", "LINK_KIND_LOGISTIC", "LINK_KIND_TABLE"}
	effectiveNames    = []string{"EFFECTIVE_SIR_UNSPECIFIED", "EFFECTIVE_SIR_LINEAR_MEAN", "EFFECTIVE_SIR_EESM"}
)

func enumString(names []string, v int) string {
	if v >= 0 && v < len(names) {
		return names[v]
	}
	return strconv.Itoa(v)
}

// enumParse accepts the proto value name (e.g. COMMAND_ADAPTIVE), the name
// without its type prefix (ADAPTIVE, any case) or its decimal number.
func enumParse(names []string, kind string, text []byte) (int, error) {
	s := string(text)
	prefix := strings.TrimSuffix(names[0], "UNSPECIFIED")
	for i, n := range names {
		if n == s || (i > 0 && n == prefix+strings.ToUpper(s)) {
			return i, nil
		}
	}
	if v, err := strconv.Atoi(s); err == nil && v >= 0 && v < len(names) {
		return v, nil
	}
	return 0, fmt.Errorf("unknown %s %q; allowed values are %s", kind, s, allowed(names))
}

// allowed lists the set values of an enum, "A, B or C" (UNSPECIFIED, which
// means "use the default", is left out).
func allowed(names []string) string {
	set := names[1:]
	switch len(set) {
	case 0:
		return ""
	case 1:
		return set[0]
	}
	return strings.Join(set[:len(set)-1], ", ") + " or " + set[len(set)-1]
}

// defined reports whether v is a set, known value of an enum with len(names) values.
func defined(names []string, v int) bool { return v > 0 && v < len(names) }

// String returns the proto value name of the Placement.
func (v Placement) String() string { return enumString(placementNames, int(v)) }

// MarshalText encodes the Placement as its proto value name.
func (v Placement) MarshalText() ([]byte, error) { return []byte(v.String()), nil }

// UnmarshalText accepts the proto value name or its number.
func (v *Placement) UnmarshalText(b []byte) error {
	x, err := enumParse(placementNames, "placement", b)
	*v = Placement(x)
	return err
}

// String returns the proto value name of the Generator.
func (v Generator) String() string { return enumString(generatorNames, int(v)) }

// MarshalText encodes the Generator as its proto value name.
func (v Generator) MarshalText() ([]byte, error) { return []byte(v.String()), nil }

// UnmarshalText accepts the proto value name or its number.
func (v *Generator) UnmarshalText(b []byte) error {
	x, err := enumParse(generatorNames, "generator", b)
	*v = Generator(x)
	return err
}

// String returns the proto value name of the PathLossModel.
func (v PathLossModel) String() string { return enumString(pathLossNames, int(v)) }

// MarshalText encodes the PathLossModel as its proto value name.
func (v PathLossModel) MarshalText() ([]byte, error) { return []byte(v.String()), nil }

// UnmarshalText accepts the proto value name or its number.
func (v *PathLossModel) UnmarshalText(b []byte) error {
	x, err := enumParse(pathLossNames, "path-loss model", b)
	*v = PathLossModel(x)
	return err
}

// String returns the proto value name of the InnerMode.
func (v InnerMode) String() string { return enumString(innerModeNames, int(v)) }

// MarshalText encodes the InnerMode as its proto value name.
func (v InnerMode) MarshalText() ([]byte, error) { return []byte(v.String()), nil }

// UnmarshalText accepts the proto value name or its number.
func (v *InnerMode) UnmarshalText(b []byte) error {
	x, err := enumParse(innerModeNames, "inner mode", b)
	*v = InnerMode(x)
	return err
}

// String returns the proto value name of the Command.
func (v Command) String() string { return enumString(commandNames, int(v)) }

// MarshalText encodes the Command as its proto value name.
func (v Command) MarshalText() ([]byte, error) { return []byte(v.String()), nil }

// UnmarshalText accepts the proto value name or its number.
func (v *Command) UnmarshalText(b []byte) error {
	x, err := enumParse(commandNames, "command", b)
	*v = Command(x)
	return err
}

// String returns the proto value name of the InitialPower.
func (v InitialPower) String() string { return enumString(initialPowerNames, int(v)) }

// MarshalText encodes the InitialPower as its proto value name.
func (v InitialPower) MarshalText() ([]byte, error) { return []byte(v.String()), nil }

// UnmarshalText accepts the proto value name or its number.
func (v *InitialPower) UnmarshalText(b []byte) error {
	x, err := enumParse(initialPowerNames, "initial power", b)
	*v = InitialPower(x)
	return err
}

// String returns the proto value name of the LinkKind.
func (v LinkKind) String() string { return enumString(linkKindNames, int(v)) }

// MarshalText encodes the LinkKind as its proto value name.
func (v LinkKind) MarshalText() ([]byte, error) { return []byte(v.String()), nil }

// UnmarshalText accepts the proto value name or its number.
func (v *LinkKind) UnmarshalText(b []byte) error {
	x, err := enumParse(linkKindNames, "link kind", b)
	*v = LinkKind(x)
	return err
}

// String returns the proto value name of the EffectiveSIR.
func (v EffectiveSIR) String() string { return enumString(effectiveNames, int(v)) }

// MarshalText encodes the EffectiveSIR as its proto value name.
func (v EffectiveSIR) MarshalText() ([]byte, error) { return []byte(v.String()), nil }

// UnmarshalText accepts the proto value name or its number.
func (v *EffectiveSIR) UnmarshalText(b []byte) error {
	x, err := enumParse(effectiveNames, "effective SIR rule", b)
	*v = EffectiveSIR(x)
	return err
}

// String returns the proto value name of the RakeFingers.
func (v RakeFingers) String() string { return enumString(rakeFingersNames, int(v)) }

// MarshalText encodes the RakeFingers as its proto value name.
func (v RakeFingers) MarshalText() ([]byte, error) { return []byte(v.String()), nil }

// UnmarshalText accepts the proto value name or its number.
func (v *RakeFingers) UnmarshalText(b []byte) error {
	x, err := enumParse(rakeFingersNames, "RAKE finger model", b)
	*v = RakeFingers(x)
	return err
}
