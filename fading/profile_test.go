package fading

import (
	"math"
	"testing"
)

// TestBuiltinProfiles checks the tables and the RMS delay spread of every
// built-in profile, computed here independently as
// √(Σ p τ² / Σ p − (Σ p τ / Σ p)²) from the published taps.
func TestBuiltinProfiles(t *testing.T) {
	published := map[string][]Tap{
		// 3GPP TS 36.101 Annex B (memory)
		"EPA": {{0, 0}, {30, -1}, {70, -2}, {90, -3}, {110, -8}, {190, -17.2}, {410, -20.8}},
		"EVA": {{0, 0}, {30, -1.5}, {150, -1.4}, {310, -3.6}, {370, -0.6}, {710, -9.1}, {1090, -7}, {1730, -12}, {2510, -16.9}},
		"ETU": {{0, -1}, {50, -1}, {120, -1}, {200, 0}, {230, 0}, {500, 0}, {1600, -3}, {2300, -5}, {5000, -7}},
		// ITU-R M.1225 (memory)
		"PEDA": {{0, 0}, {110, -9.7}, {190, -19.2}, {410, -22.8}},
		"VEHA": {{0, 0}, {310, -1}, {710, -9}, {1090, -10}, {1730, -15}, {2510, -20}},
		"FLAT": {{0, 0}},
	}
	// r.m.s. delay spreads quoted with the profiles: 43, 357, 991 ns (3GPP
	// TS 36.101 Annex B (memory)); about 45 and 370 ns (ITU-R M.1225 (memory)).
	quoted := map[string]float64{"EPA": 43, "EVA": 357, "ETU": 991, "PEDA": 45, "VEHA": 370, "FLAT": 0}
	names := BuiltinProfileNames()
	if len(names) != len(published) {
		t.Fatalf("%d built-in profiles, want %d", len(names), len(published))
	}
	for name, taps := range published {
		p, err := BuiltinProfile(name)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if len(p.Taps) != len(taps) {
			t.Fatalf("%s: %d taps, want %d", name, len(p.Taps), len(taps))
		}
		var s0, s1, s2 float64
		for i, tp := range taps {
			if p.Taps[i] != tp {
				t.Errorf("%s tap %d: %+v, want %+v", name, i, p.Taps[i], tp)
			}
			w := math.Pow(10, tp.PowerDB/10)
			s0 += w
			s1 += w * tp.DelayNs
			s2 += w * tp.DelayNs * tp.DelayNs
		}
		want := math.Sqrt(s2/s0 - (s1/s0)*(s1/s0))
		if got := p.RMSDelaySpreadNs(); math.Abs(got-want) > 1e-6*(1+want) {
			t.Errorf("%s: RMS delay spread %.4f ns, independent computation %.4f ns", name, got, want)
		}
		if math.Abs(want-quoted[name]) > 0.03*quoted[name]+0.5 {
			t.Errorf("%s: RMS delay spread %.1f ns, quoted %.0f ns", name, want, quoted[name])
		}
		sum := 0.0
		for _, v := range p.NormalisedPowers() {
			sum += v
		}
		if math.Abs(sum-1) > 1e-12 {
			t.Errorf("%s: normalised powers sum to %g", name, sum)
		}
	}
	if p, err := BuiltinProfile("eva"); err != nil || p.Name != "EVA" {
		t.Errorf("case-insensitive lookup failed: %v", err)
	}
	if _, err := BuiltinProfile("nope"); err == nil {
		t.Error("unknown profile accepted")
	}
	// a custom profile: two equal taps 100 ns apart spread 50 ns
	if v := (Profile{Taps: []Tap{{0, 0}, {100, 0}}}).RMSDelaySpreadNs(); math.Abs(v-50) > 1e-9 {
		t.Errorf("custom two-tap spread %g, want 50", v)
	}
}
