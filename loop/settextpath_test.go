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
