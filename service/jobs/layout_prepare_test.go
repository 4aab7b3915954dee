package jobs

import (
	"errors"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/tune"
)

// TestPrepareLayoutAxis: the queued sweep rejects an axis value that only
// the multi-cell engine's rules reject (layout.sites = 1 with wrap-around:
// multicell.Layout wraps 7 or 19 sites only) before any unit is queued,
// with the same violation as the direct path (tune.CheckAxes); before, the
// point failed on the workers after 3 attempts.
func TestPrepareLayoutAxis(t *testing.T) {
	base := loop.Scenario{
		Groups: []loop.UserGroup{{Count: 4, Speeds: []loop.SpeedShare{{SpeedKmh: 30}}}},
		Run:    loop.RunSettings{Slots: 900, WarmupSlots: 300, Seed: 11},
		Layout: loop.Layout{Sites: 7, InterSiteDistanceM: 1000, WrapAround: true},
	}
	_, err := Prepare(SweepSpec{Base: base, Axes: []tune.Axis{{Path: "layout.sites", Values: []float64{1, 7}}}})
	var vs loop.Violations
	const want = "layout.sites = 1 makes layout.wrap_around invalid: needs 7 or 19 sites, got 1"
	if !errors.As(err, &vs) || len(vs) != 1 || vs[0].Field != "axes[0].values[0]" || vs[0].Rule != want {
		t.Errorf("got %v, want axes[0].values[0]: %s", err, want)
	}
}
