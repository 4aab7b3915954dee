package loop

import "github.com/fadeloop/fadeloop/fading"

// groupProfile is the tap-delay profile that group g of a valid scenario
// is simulated with: its built-in profile by name (fading.BuiltinProfile),
// or its custom taps (delay ns, power dB) under the name "custom". Every
// tap is one path of the channel.
func groupProfile(sc Scenario, g int) fading.Profile {
	grp := sc.Groups[g]
	var p fading.Profile
	if grp.Profile != "" {
		p, _ = fading.BuiltinProfile(grp.Profile)
		return p
	}
	p.Name = "custom"
	for _, t := range grp.CustomTaps {
		p.Taps = append(p.Taps, fading.Tap{DelayNs: t.DelayNs, PowerDB: t.PowerDB})
	}
	return p
}
