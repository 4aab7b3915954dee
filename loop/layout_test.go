package loop

import "testing"

// TestShadowingSlotsFor: the default shadowing update interval is the slots
// to travel d_c/100 at the fastest group's speed (v = km/h / 3.6 m/s),
// rounded down, in [1, 1500]; Normalise fills it from the scenario's
// fastest speed-mix entry and its update rate, and keeps a set value.
func TestShadowingSlotsFor(t *testing.T) {
	for _, c := range []struct {
		dcM, kmh, rateHz float64
		want             int
	}{
		{50, 30, 1500, 90},      // 0.5 m / 8.333 m/s = 0.06 s
		{50, 120, 1500, 22},     // 0.015 s = 22.5 slots
		{50, 3, 1500, 900},      // 0.6 s
		{20, 3, 1500, 360},      // 0.2 m / 0.8333 m/s = 0.24 s
		{50, 0, 1500, 1500},     // nobody moves: the bound
		{50, 1, 1500, 1500},     // 1.8 s, bounded to 1 s
		{50, 1000, 1500, 2},     // 0.5 m / 277.8 m/s = 2.7 slots
		{1, 1000, 1500, 1},      // 0.01 m: below one slot, one slot
		{50, 30, 750, 45},       // half the rate, half the slots
		{10000, 30, 1500, 1500}, // 100 m at 8.3 m/s: bounded
	} {
		if got := ShadowingSlotsFor(c.dcM, c.kmh, c.rateHz); got != c.want {
			t.Errorf("ShadowingSlotsFor(%g m, %g km/h, %g Hz) = %d, want %d", c.dcM, c.kmh, c.rateHz, got, c.want)
		}
	}
	sc := Scenario{
		Groups: []UserGroup{{Count: 2, Speeds: []SpeedShare{{SpeedKmh: 3}, {SpeedKmh: 120}}}, {Count: 1, Speeds: []SpeedShare{{SpeedKmh: 30}}}},
		Layout: Layout{Sites: 7},
	}
	sc.Normalise()
	if got := sc.Layout.Propagation.ShadowingSlots; got != 22 {
		t.Errorf("normalised shadowing_slots = %d, want 22 (120 km/h, the fastest entry)", got)
	}
	sc.Layout.Propagation.ShadowingSlots = 15
	sc.Normalise()
	if got := sc.Layout.Propagation.ShadowingSlots; got != 15 {
		t.Errorf("a set shadowing_slots became %d, want 15", got)
	}
}
