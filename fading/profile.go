package fading

import (
	"fmt"
	"math"
	"slices"
	"strings"
)

// MaxTaps is the largest number of taps a Profile may have.
const MaxTaps = 64

// Tap is one path of a tap-delay line: its excess delay in ns (>= 0) and its
// mean power in dB relative to any common reference (profiles are
// normalised to unit total power before use).
type Tap struct {
	DelayNs float64 // excess delay, ns, >= 0
	PowerDB float64 // mean power, dB (relative), finite
}

// Profile is a tap-delay profile: taps sorted by strictly increasing delay.
// Each tap of a channel is an independent fading process; the combined gain
// of ideal maximal-ratio (RAKE) combining is Σ_l |h_l|². A receiver at a
// finite chip rate cannot separate taps less than one chip apart:
// ResolveFingers turns a profile into the fingers it actually combines.
type Profile struct {
	Name string // trade name or a caller's label; informational
	Taps []Tap
}

// builtinProfiles holds the built-in tap-delay profiles (delay ns, power dB).
var builtinProfiles = []Profile{
	{Name: "FLAT", Taps: []Tap{{0, 0}}},
	// extended pedestrian A: 3GPP TS 36.101 Annex B (memory)
	{Name: "EPA", Taps: []Tap{{0, 0}, {30, -1}, {70, -2}, {90, -3}, {110, -8}, {190, -17.2}, {410, -20.8}}},
	// extended vehicular A: 3GPP TS 36.101 Annex B (memory)
	{Name: "EVA", Taps: []Tap{{0, 0}, {30, -1.5}, {150, -1.4}, {310, -3.6}, {370, -0.6}, {710, -9.1}, {1090, -7}, {1730, -12}, {2510, -16.9}}},
	// extended typical urban: 3GPP TS 36.101 Annex B (memory)
	{Name: "ETU", Taps: []Tap{{0, -1}, {50, -1}, {120, -1}, {200, 0}, {230, 0}, {500, 0}, {1600, -3}, {2300, -5}, {5000, -7}}},
	// pedestrian A: ITU-R M.1225 (memory)
	{Name: "PEDA", Taps: []Tap{{0, 0}, {110, -9.7}, {190, -19.2}, {410, -22.8}}},
	// vehicular A: ITU-R M.1225 (memory)
	{Name: "VEHA", Taps: []Tap{{0, 0}, {310, -1}, {710, -9}, {1090, -10}, {1730, -15}, {2510, -20}}},
}

// BuiltinProfileNames returns the names accepted by BuiltinProfile:
// "FLAT" (one tap), "EPA", "EVA", "ETU" (3GPP TS 36.101 Annex B extended
// pedestrian A, vehicular A, typical urban) and "PEDA", "VEHA" (ITU-R
// M.1225 pedestrian A, vehicular A).
func BuiltinProfileNames() []string {
	names := make([]string, len(builtinProfiles))
	for i, p := range builtinProfiles {
		names[i] = p.Name
	}
	return names
}

// BuiltinProfile returns a copy of the built-in profile with the given name
// (case-insensitive; see BuiltinProfileNames), or a *ParamError naming
// "Profile.Name".
func BuiltinProfile(name string) (Profile, error) {
	for _, p := range builtinProfiles {
		if strings.EqualFold(p.Name, strings.TrimSpace(name)) {
			return Profile{Name: p.Name, Taps: slices.Clone(p.Taps)}, nil
		}
	}
	return Profile{}, paramErr("Profile.Name", "unknown profile %q; built-in profiles are %s",
		name, strings.Join(BuiltinProfileNames(), ", "))
}

// Validate returns a *ParamError (parameter "Taps" or "Taps[i].DelayNs",
// "Taps[i].PowerDB") unless the profile has 1..MaxTaps taps, every delay is
// finite, >= 0 and strictly greater than the previous one, and every power
// is finite and within [-300, 300] dB.
func (p Profile) Validate() error {
	if len(p.Taps) == 0 {
		return paramErr("Taps", "must have at least one tap")
	}
	if len(p.Taps) > MaxTaps {
		return paramErr("Taps", "must have at most %d taps, got %d", MaxTaps, len(p.Taps))
	}
	for i, t := range p.Taps {
		if !finite(t.DelayNs) || t.DelayNs < 0 {
			return paramErr(fmt.Sprintf("Taps[%d].DelayNs", i), "must be finite and >= 0 ns, got %g", t.DelayNs)
		}
		if i > 0 && !(t.DelayNs > p.Taps[i-1].DelayNs) {
			return paramErr(fmt.Sprintf("Taps[%d].DelayNs", i),
				"taps must be sorted by strictly increasing delay (%g ns follows %g ns)", t.DelayNs, p.Taps[i-1].DelayNs)
		}
		if !finite(t.PowerDB) || t.PowerDB < -300 || t.PowerDB > 300 { // the name formatted only for the error
			return checkRange(fmt.Sprintf("Taps[%d].PowerDB", i), t.PowerDB, -300, 300, "dB")
		}
	}
	return nil
}

// NormalisedPowers returns the linear mean tap powers scaled to sum to 1:
// p_l = 10^(P_l/10) / Σ_k 10^(P_k/10). It returns nil for an invalid profile.
func (p Profile) NormalisedPowers() []float64 {
	if p.Validate() != nil {
		return nil
	}
	maxDB := math.Inf(-1)
	for _, t := range p.Taps {
		maxDB = math.Max(maxDB, t.PowerDB)
	}
	w := make([]float64, len(p.Taps))
	sum := 0.0
	for i, t := range p.Taps {
		w[i] = math.Pow(10, (t.PowerDB-maxDB)/10)
		sum += w[i]
	}
	for i := range w {
		w[i] /= sum
	}
	return w
}

// MeanDelayNs returns the power-weighted mean excess delay Σ p_l τ_l in ns
// (p_l normalised powers), or NaN for an invalid profile.
func (p Profile) MeanDelayNs() float64 {
	w := p.NormalisedPowers()
	if w == nil {
		return math.NaN()
	}
	m := 0.0
	for i, t := range p.Taps {
		m += w[i] * t.DelayNs
	}
	return m
}

// RMSDelaySpreadNs returns the RMS delay spread in ns, the square root of the
// second central moment of the power delay profile:
// τ_rms = √(Σ p_l τ_l² − (Σ p_l τ_l)²) with p_l the normalised powers
// (Rappaport, Wireless Communications). It returns NaN for an invalid profile.
func (p Profile) RMSDelaySpreadNs() float64 {
	w := p.NormalisedPowers()
	if w == nil {
		return math.NaN()
	}
	m := p.MeanDelayNs()
	v := 0.0
	for i, t := range p.Taps {
		d := t.DelayNs - m
		v += w[i] * d * d
	}
	return math.Sqrt(v)
}
