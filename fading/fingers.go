package fading

import (
	"cmp"
	"fmt"
	"math"
	"slices"
)

// MaxFingers is the largest finger count ResolveFingers accepts.
const MaxFingers = MaxTaps

// FingerSet is what a RAKE receiver at a given chip rate sees of a
// tap-delay profile (see ResolveFingers).
type FingerSet struct {
	// Profile holds one tap per kept finger, in increasing delay: the delay
	// of the finger's first (earliest) tap in ns and the finger's mean power
	// in dB relative to the total power of the input profile (so the kept
	// powers sum to CapturedFraction, not to 1).
	Profile Profile
	// RicianKDB is the K factor in dB of the first finger when LOS is set:
	// the specular power of the LOS tap over the summed diffuse power of
	// every tap merged into that finger, clamped to [MinRicianKDB,
	// MaxRicianKDB]. It equals the input K when the LOS tap is resolved
	// alone, and is 0 without LOS.
	RicianKDB float64
	// Resolvable is the number of paths the receiver can separate at its
	// chip rate (clusters, before the finger limit).
	Resolvable int
	// CapturedFraction is the share of the profile's total mean power in
	// the kept fingers, (0, 1]; 1 unless the finger limit dropped some.
	CapturedFraction float64
}

// ResolveFingers merges the taps of p that a RAKE receiver with chip rate
// chipRateHz cannot separate and keeps at most maxFingers fingers.
//
// Clustering rule (greedy from the earliest tap, common practice): with
// chip duration T_c = 1/chipRateHz, a finger starts at the earliest tap not
// yet assigned and takes every later tap whose delay is less than T_c after
// that first tap (τ − τ_first < T_c); the next tap starts the next finger.
// Paths less than one chip apart add as complex gains at the correlator
// output (Proakis, Digital Communications, resolvable multipath (memory)).
//
// Channel model of a merged finger: the taps are independent zero-mean
// complex Gaussian processes with the same Clarke Doppler spectrum, so their
// complex sum is again one such process (Rayleigh) whose mean power is the
// sum of the tap powers. With LOS, the first tap is Rician: its specular
// power p_0·K/(K+1) is kept and the diffuse powers p_0/(K+1) + Σ p_l of the
// finger's taps add, so the finger is Rician with K' = p_0·K/(K+1) / (p_0/(K+1) + Σ p_l).
//
// Finger limit: when there are more than maxFingers clusters, the
// maxFingers strongest are kept (ties: the earlier one), except that with
// LOS the first finger, which holds the specular path, is always kept. The
// kept fingers' powers stay relative to the whole profile, so
// CapturedFraction < 1 tells the energy the receiver does not collect.
//
// maxFingers <= 0 means no limit. chipRateHz must be finite and > 0, and
// kDB finite when los is set; p must be valid (Profile.Validate). Errors
// are *ParamError naming "ChipRateHz", "RicianKDB" or the profile field.
func ResolveFingers(p Profile, chipRateHz float64, maxFingers int, los bool, kDB float64) (FingerSet, error) {
	if err := p.Validate(); err != nil {
		return FingerSet{}, err
	}
	if !finite(chipRateHz) || chipRateHz <= 0 {
		return FingerSet{}, paramErr("ChipRateHz", "must be finite and > 0 Hz, got %g", chipRateHz)
	}
	if los {
		if err := checkRange("RicianKDB", kDB, MinRicianKDB, MaxRicianKDB, "dB"); err != nil {
			return FingerSet{}, err
		}
	}
	chipNs := 1e9 / chipRateHz
	w := p.NormalisedPowers()
	type cluster struct {
		delay, power float64
		idx          int
	}
	var cs []cluster
	for i, t := range p.Taps {
		if len(cs) == 0 || !(t.DelayNs-cs[len(cs)-1].delay < chipNs) {
			cs = append(cs, cluster{delay: t.DelayNs, idx: len(cs)})
		}
		cs[len(cs)-1].power += w[i]
	}
	fs := FingerSet{Resolvable: len(cs)}
	if los {
		k := math.Pow(10, kDB/10)
		spec := w[0] * k / (k + 1)
		diffuse := cs[0].power - spec
		kp := float64(MaxRicianKDB)
		if diffuse > 0 {
			kp = 10 * math.Log10(spec/diffuse)
		}
		fs.RicianKDB = math.Min(MaxRicianKDB, math.Max(MinRicianKDB, kp))
	}
	kept := cs
	if maxFingers > 0 && len(cs) > maxFingers {
		order := slices.Clone(cs)
		slices.SortStableFunc(order, func(a, b cluster) int { return cmp.Compare(b.power, a.power) })
		kept = order[:maxFingers]
		if los && !slices.ContainsFunc(kept, func(c cluster) bool { return c.idx == 0 }) {
			kept[maxFingers-1] = cs[0]
		}
		slices.SortFunc(kept, func(a, b cluster) int { return cmp.Compare(a.idx, b.idx) })
	}
	fs.Profile = Profile{Name: p.Name, Taps: make([]Tap, len(kept))}
	for i, c := range kept {
		fs.Profile.Taps[i] = Tap{DelayNs: c.delay, PowerDB: math.Max(-300, 10*math.Log10(c.power))}
		fs.CapturedFraction += c.power
	}
	fs.CapturedFraction = math.Min(1, fs.CapturedFraction)
	if err := fs.Profile.Validate(); err != nil {
		// Unreachable for a valid p: delays stay strictly increasing and
		// powers are clamped to the valid range.
		panic(fmt.Sprintf("fading: merged profile invalid: %v", err))
	}
	return fs, nil
}
