package loop

import (
	"math"

	"github.com/fadeloop/fadeloop/fading"
)

// GroupFingers is what the receiver makes of one group's tap-delay profile
// (see Receiver.RakeFingers and fading.ResolveFingers).
type GroupFingers struct {
	Group           int     `json:"group"`             // group index
	Taps            int     `json:"taps"`              // taps of the group's profile
	ResolvablePaths int     `json:"resolvable_paths"`  // paths separable at chip_rate_hz (taps less than one chip after a finger's first tap merge)
	Fingers         int     `json:"fingers"`           // fingers the simulated receiver combines: resolvable paths up to max_fingers, or every tap with RAKE_FINGERS_IDEAL_EVERY_TAP
	CapturedPowerDB float64 `json:"captured_power_db"` // mean power of the combined fingers over the profile's total, dB, <= 0 (below 0 when max_fingers drops paths)
	FirstFingerKDB  float64 `json:"first_finger_k_db"` // Rician K of the first finger in dB when the group has LOS (merged taps lower it), else 0
}

// groupFingerSet resolves group g of a normalised, valid scenario: the
// built-in profile by name, else custom_taps, then, unless the receiver is
// RAKE_FINGERS_IDEAL_EVERY_TAP, fading.ResolveFingers at the receiver's
// chip rate with max_fingers. With the ideal receiver the profile is
// returned as is (every tap a finger, the group's K on the first tap, all
// power captured). On an invalid scenario it returns the unmerged profile
// (possibly empty) and never panics.
func groupFingerSet(sc Scenario, g int) fading.FingerSet {
	grp := sc.Groups[g]
	var p fading.Profile
	if grp.Profile != "" {
		p, _ = fading.BuiltinProfile(grp.Profile)
	} else {
		p.Name = "custom"
		for _, t := range grp.CustomTaps {
			p.Taps = append(p.Taps, fading.Tap{DelayNs: t.DelayNs, PowerDB: t.PowerDB})
		}
	}
	return FingerSetFor(p, sc.Receiver, grp.LOS, grp.RicianKDB)
}

// FingerSetFor is the one place a tap-delay profile p becomes the RAKE
// fingers of receiver r (single-cell engine and loop/multicell): unless r
// is RAKE_FINGERS_IDEAL_EVERY_TAP, fading.ResolveFingers at r.ChipRateHz
// with r.MaxFingers; with the ideal receiver p as is (every tap a finger,
// kDB on the first tap when los, all power captured). On an invalid input
// it returns p unmerged and never panics.
func FingerSetFor(p fading.Profile, r Receiver, los bool, kDB float64) fading.FingerSet {
	ideal := fading.FingerSet{Profile: p, Resolvable: len(p.Taps), CapturedFraction: 1}
	if los {
		ideal.RicianKDB = kDB
	}
	fs, err := fading.ResolveFingers(p, r.ChipRateHz, r.MaxFingers, los, kDB)
	if err != nil {
		return ideal
	}
	if r.RakeFingers == RakeFingersIdealEveryTap {
		ideal.Resolvable = fs.Resolvable
		return ideal
	}
	return fs
}

// groupProfile returns the tap-delay profile the engine simulates for group
// g: one tap per RAKE finger (groupFingerSet). Its powers are relative to
// the whole profile; fading.NewChannel renormalises them to unit total, so
// the energy of dropped fingers is applied separately (groupCapturedLin).
func groupProfile(sc Scenario, g int) fading.Profile {
	return groupFingerSet(sc, g).Profile
}

// groupRicianKDB is the K factor in dB of the first finger of group g (the
// group's rician_k_db lowered by the diffuse power of taps merged with the
// LOS tap); meaningful only when the group has LOS.
func groupRicianKDB(sc Scenario, g int) float64 {
	if !sc.Groups[g].LOS {
		return sc.Groups[g].RicianKDB
	}
	return groupFingerSet(sc, g).RicianKDB
}

// groupCapturedLin is the share (0, 1] of the profile's mean power that the
// combined fingers of group g collect; the engine multiplies the user's
// mean channel gain by it.
func groupCapturedLin(sc Scenario, g int) float64 {
	grp := sc.Groups[g]
	if sc.Receiver.RakeFingers == RakeFingersIdealEveryTap ||
		(grp.Profile == "" && len(grp.CustomTaps) <= sc.Receiver.MaxFingers) {
		return 1 // every path kept: no need to resolve (called once per user)
	}
	c := groupFingerSet(sc, g).CapturedFraction
	if !(c > 0) || c > 1 {
		return 1
	}
	return c
}

// groupFingers summarises every group's fingers for the Report.
func groupFingers(sc Scenario) []GroupFingers {
	out := make([]GroupFingers, len(sc.Groups))
	for g := range sc.Groups {
		fs := groupFingerSet(sc, g)
		taps := len(sc.Groups[g].CustomTaps)
		if sc.Groups[g].Profile != "" {
			if p, err := fading.BuiltinProfile(sc.Groups[g].Profile); err == nil {
				taps = len(p.Taps)
			}
		}
		out[g] = GroupFingers{Group: g, Taps: taps, ResolvablePaths: fs.Resolvable, Fingers: len(fs.Profile.Taps),
			CapturedPowerDB: 10 * math.Log10(groupCapturedLin(sc, g))}
		if sc.Groups[g].LOS {
			out[g].FirstFingerKDB = fs.RicianKDB
		}
	}
	return out
}
