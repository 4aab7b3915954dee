package tune

import (
	"testing"

	"github.com/fadeloop/fadeloop/loop"
)

// TestLayoutAxisValueRejectedUpFront: an axis value that only the
// multi-cell engine's rules reject (layout.sites = 1 with wrap-around on:
// multicell.Layout needs 7 or 19 sites to wrap) makes PlanSweep and
// PlanTune fail before any run, at the axis value, naming the value and
// the broken field; before, the point failed when it ran. A combination
// of values that only together break a rule (19 sites × 3 sectors × 400
// users per cell = 22 800 users, above multicell.MaxUsers = 20 000) is
// reported by SweepPlan.Check at the grid point.
func TestLayoutAxisValueRejectedUpFront(t *testing.T) {
	const want = "layout.sites = 1 makes layout.wrap_around invalid: needs 7 or 19 sites, got 1"
	axes := []Axis{{Path: "layout.handover.window_db", Values: []float64{1, 3}}, {Path: "layout.sites", Values: []float64{1, 7}}}
	check := func(name string, err error) {
		t.Helper()
		vs, ok := err.(loop.Violations)
		if !ok || len(vs) != 1 || vs[0].Field != "axes[1].values[0]" || vs[0].Rule != want {
			t.Errorf("%s: got %v, want one violation axes[1].values[0]: %s", name, err, want)
		}
	}
	_, err := PlanSweep(SweepRequest{Base: multiBase(), Axes: axes, SeedMode: SeedModeCommon})
	check("PlanSweep", err)
	_, err = PlanTune(Request{Base: multiBase(), Axes: axes, Objective: Objective{Kind: ObjectiveMinSIRErrorStd}})
	check("PlanTune", err)
	g, err := NewGrid(multiBase(), axes)
	if err != nil {
		t.Fatal(err)
	}
	if vs := CheckAxes(multiBase(), g); len(vs) != 1 || vs[0].Rule != want {
		t.Errorf("CheckAxes: %v", vs)
	}

	base := multiBase()
	base.Layout.SectorsPerSite = 3
	plan, err := PlanSweep(SweepRequest{Base: base, SeedMode: SeedModeCommon, Axes: []Axis{
		{Path: "layout.sites", Values: []float64{7, 19}}, {Path: "groups[0].count", Values: []float64{4, 400}}}})
	if err != nil {
		t.Fatalf("each value alone is valid: %v", err)
	}
	err = plan.Check(t.Context())
	vs, ok := err.(loop.Violations)
	const point = "at grid point 3 (sites=19, groups[0].count=400): groups: the layout holds 22800 users, more than 20000"
	if !ok || len(vs) != 1 || vs[0].Field != "axes" || vs[0].Rule != point {
		t.Errorf("Check: got %v, want axes: %s", err, point)
	}
}
