package loop

import (
	"strings"
	"testing"
)

func TestSetTextPath(t *testing.T) {
	sc := CanonicalScenario()
	if err := SetTextPath(&sc, "inner_loop.mode", "INNER_MODE_FIXED_POWER"); err != nil {
		t.Fatal(err)
	}
	if sc.InnerLoop.Mode != InnerModeFixedPower {
		t.Errorf("inner_loop.mode = %v, want INNER_MODE_FIXED_POWER", sc.InnerLoop.Mode)
	}
	if err := SetTextPath(&sc, "groups[0].profile", "EVA"); err != nil {
		t.Fatal(err)
	}
	if sc.Groups[0].Profile != "EVA" || sc.Groups[0].CustomTaps != nil {
		t.Errorf("profile %q with %d custom taps, want EVA and none", sc.Groups[0].Profile, len(sc.Groups[0].CustomTaps))
	}
	before := sc.InnerLoop.Mode
	for _, c := range []struct{ path, text, want string }{
		{"inner_loop.mode", "INNER_MODE_BOGUS", "inner_loop.mode"},
		{"inner_loop.step_db", "1", "takes a number"},
		{"inner_loop.nope", "x", "unknown field"},
		{"groups[3].profile", "EPA", "out of range"},
		{"", "x", "empty field path"},
	} {
		err := SetTextPath(&sc, c.path, c.text)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("SetTextPath(%q, %q) = %v, want an error containing %q", c.path, c.text, err, c.want)
		}
	}
	if sc.InnerLoop.Mode != before {
		t.Errorf("a rejected enum name changed inner_loop.mode to %v", sc.InnerLoop.Mode)
	}
}

func TestSetPathGroupSpeed(t *testing.T) {
	sc := CanonicalScenario()
	sc.Groups[0].Speeds = []SpeedShare{{SpeedKmh: 3, Weight: 2}, {SpeedKmh: 30, Weight: 1}}
	if !IsGroupSpeedPath("groups[0].speed_kmh") || IsGroupSpeedPath("groups[0].speeds[0].speed_kmh") || IsGroupSpeedPath("groups.speed_kmh") {
		t.Error("IsGroupSpeedPath misclassifies a path")
	}
	if err := SetPath(&sc, "groups[0].speed_kmh", 120); err != nil {
		t.Fatal(err)
	}
	for i, s := range sc.Groups[0].Speeds {
		if s.SpeedKmh != 120 || s.Weight != []float64{2, 1}[i] {
			t.Errorf("speed %d = %+v, want 120 km/h with its weight kept", i, s)
		}
	}
	if err := SetPath(&sc, "groups[9].speed_kmh", 1); err == nil || !strings.Contains(err.Error(), "out of range") {
		t.Errorf("group out of range: err %v", err)
	}
}

func TestCloneSharesNoSlice(t *testing.T) {
	sc := CanonicalScenario()
	sc.InnerLoop.LevelsDB = []float64{-1, 0, 1}
	sc.Link.Table = []LinkPoint{{SIRDB: 0, BLER: 0.5}, {SIRDB: 5, BLER: 0.01}}
	sc.Groups[0].DistancesM = []float64{100, 200}
	c := sc.Clone()
	c.Groups[0].Speeds[0].SpeedKmh = 999
	c.Groups[0].DistancesM[0] = 999
	c.Groups[0].CustomTaps[0].PowerDB = 999
	c.InnerLoop.LevelsDB[0] = 999
	c.Link.Table[0].BLER = 999
	c.Groups[0].Count = 999
	if sc.Groups[0].Speeds[0].SpeedKmh == 999 || sc.Groups[0].DistancesM[0] == 999 || sc.Groups[0].CustomTaps[0].PowerDB == 999 ||
		sc.InnerLoop.LevelsDB[0] == 999 || sc.Link.Table[0].BLER == 999 || sc.Groups[0].Count == 999 {
		t.Error("changing the clone changed the original")
	}
	if d := (Scenario{}).Clone(); d.Groups != nil || d.InnerLoop.LevelsDB != nil {
		t.Error("Clone turned nil slices into empty ones")
	}
}
