package tune

import (
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
)

func TestAxisResolve(t *testing.T) {
	tests := []struct {
		name string
		a    Axis
		want []float64
		bad  string // substring of the violation field, "" = valid
	}{
		{"list", Axis{Path: "inner_loop.step_db", Values: []float64{2, 0.5, 1}}, []float64{2, 0.5, 1}, ""},
		{"linear", Axis{Path: "inner_loop.feedback_delay_slots", First: 0, Last: 4, Count: 5}, []float64{0, 1, 2, 3, 4}, ""},
		{"log", Axis{Path: "inner_loop.update_rate_hz", First: 100, Last: 1600, Count: 5, Log: true}, []float64{100, 200, 400, 800, 1600}, ""},
		{"single", Axis{Path: "inner_loop.step_db", First: 3, Last: 9, Count: 1}, []float64{3}, ""},
		{"both", Axis{Path: "x", Values: []float64{1}, Count: 2}, nil, "axes[0].count"},
		{"dup", Axis{Path: "x", Values: []float64{1, 1}}, nil, "axes[0].values[1]"},
		{"nan", Axis{Path: "x", Values: []float64{math.NaN()}}, nil, "axes[0].values[0]"},
		{"no count", Axis{Path: "x"}, nil, "axes[0].count"},
		{"log negative", Axis{Path: "x", First: -1, Last: 2, Count: 3, Log: true}, nil, "axes[0].first"},
		{"no path", Axis{Values: []float64{1}}, nil, "axes[0].path"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, v := tc.a.Resolve("axes[0]")
			if tc.bad != "" {
				if len(v) == 0 || !strings.Contains(v.Error(), tc.bad) {
					t.Fatalf("violations %v, want field %q", v, tc.bad)
				}
				return
			}
			if len(v) > 0 {
				t.Fatal(v)
			}
			if len(got) != len(tc.want) {
				t.Fatalf("got %v, want %v", got, tc.want)
			}
			for i := range got {
				if math.Abs(got[i]-tc.want[i]) > 1e-9*math.Abs(tc.want[i]) {
					t.Errorf("value %d = %v, want %v", i, got[i], tc.want[i])
				}
			}
		})
	}
}

func TestGridOrderAndApply(t *testing.T) {
	base := loop.CanonicalScenario()
	g, err := NewGrid(base, []Axis{
		{Path: "inner_loop.step_db", Values: []float64{0.5, 1, 2}},
		{Path: "inner_loop.update_rate_hz", Values: []float64{800, 1500}},
	})
	if err != nil {
		t.Fatal(err)
	}
	if g.Size() != 6 {
		t.Fatalf("size %d", g.Size())
	}
	// Row-major, last axis fastest.
	want := [][2]float64{{0.5, 800}, {0.5, 1500}, {1, 800}, {1, 1500}, {2, 800}, {2, 1500}}
	for i, p := range g.Points() {
		if p.Index != i || p.Coords[0].Value != want[i][0] || p.Coords[1].Value != want[i][1] {
			t.Errorf("point %d = %+v, want %v", i, p, want[i])
		}
	}
	sc, err := g.Point(5).ApplyTo(base)
	if err != nil {
		t.Fatal(err)
	}
	if sc.InnerLoop.StepDB != 2 || sc.InnerLoop.UpdateRateHz != 1500 {
		t.Errorf("applied %+v", sc.InnerLoop)
	}
	if base.InnerLoop.StepDB != 1 {
		t.Error("Apply on a clone changed the base")
	}
	if got := g.Point(1).Label(); got != "step_db=0.5, update_rate_hz=1500" {
		t.Errorf("label %q", got)
	}
}

func TestGridBadPaths(t *testing.T) {
	base := loop.CanonicalScenario()
	_, err := NewGrid(base, []Axis{
		{Path: "inner_loop.no_such", Values: []float64{1}},
		{Path: "groups[3].count", Values: []float64{1}},
		{Path: "inner_loop.feedback_delay_slots", Values: []float64{0.5}},
		{Path: "inner_loop.step_db", Values: []float64{1}},
		{Path: "inner_loop.step_db", Values: []float64{2}},
	})
	var v loop.Violations
	if !errors.As(err, &v) {
		t.Fatalf("err %v, want loop.Violations", err)
	}
	for _, f := range []string{"axes[0].path", "axes[1].path", "axes[2].path", "axes[4].path"} {
		found := false
		for _, x := range v {
			found = found || x.Field == f
		}
		if !found {
			t.Errorf("no violation for %s in %v", f, v)
		}
	}
}

func TestOverridesAndClone(t *testing.T) {
	// The canonical scenario has custom taps: a profile override replaces
	// them, and the result is valid.
	veh, err := Condition{Overrides: []Override{{Path: "groups[0].profile", Text: "EVA"}}}.ApplyTo(loop.CanonicalScenario())
	if err != nil {
		t.Fatal(err)
	}
	if veh.Groups[0].CustomTaps != nil || len(veh.Validate()) > 0 {
		t.Errorf("profile override: taps %v, violations %v", veh.Groups[0].CustomTaps, veh.Validate())
	}
	base := loop.CanonicalScenario()
	base.Groups[0].Profile = "EPA"
	base.Groups[0].CustomTaps = nil
	c := Condition{Name: "veh", Weight: 1, Overrides: []Override{
		{Path: "groups[0].profile", Text: "EVA"},
		{Path: "groups[0].speeds[0].speed_kmh", Value: 120},
		{Path: "inner_loop.mode", Text: "INNER_MODE_FIXED_POWER"},
		{Path: "groups[0].count", Value: 8},
	}}
	sc := base.Clone()
	if err := c.Apply(&sc); err != nil {
		t.Fatal(err)
	}
	g := sc.Groups[0]
	if g.Profile != "EVA" || g.Speeds[0].SpeedKmh != 120 || g.Count != 8 || sc.InnerLoop.Mode != loop.InnerModeFixedPower {
		t.Errorf("overrides not applied: %+v %v", g, sc.InnerLoop.Mode)
	}
	if base.Groups[0].Speeds[0].SpeedKmh != 30 || base.Groups[0].Profile != "EPA" {
		t.Error("clone shares slices with the base")
	}
	for _, o := range []Override{
		{Path: "groups[0].count", Text: "x"},
		{Path: "inner_loop.mode", Text: "NOPE"},
		{Path: "groups[2].profile", Text: "EVA"},
	} {
		s := base.Clone()
		if err := o.Apply(&s); err == nil || !strings.Contains(err.Error(), o.Path) {
			t.Errorf("override %+v: err %v, want one naming the path", o, err)
		}
	}
}

func TestGridOffsetsRowMajor(t *testing.T) {
	g := &Grid{Axes: make([]Axis, 3), values: [][]float64{make([]float64, 3), make([]float64, 4), make([]float64, 2)}, size: 24}
	seen := map[[3]int]bool{}
	for i := range 24 {
		c := g.Offsets(i)
		if want := c[0]*8 + c[1]*2 + c[2]; want != i {
			t.Fatalf("index %d -> %v -> %d", i, c, want)
		}
		seen[[3]int{c[0], c[1], c[2]}] = true
	}
	if len(seen) != 24 {
		t.Errorf("%d distinct coordinates of 24", len(seen))
	}
}
