package multicell

import (
	"context"
	"reflect"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
)

// TestValidateIsRunScenarioCheck: Validate reports exactly what
// RunScenario refuses a scenario for, without running it: nothing for a
// valid layout; the multi-cell engine's rule (wrap-around on one site)
// with its scenario path; only loop's rules while those fail (RunScenario
// stops there too); loop's rules alone for a single-cell scenario.
func TestValidateIsRunScenarioCheck(t *testing.T) {
	norm := func(sc loop.Scenario) loop.Scenario { sc.Normalise(); return sc }
	one := multiScenario()
	one.Layout.Sites = 1
	both := one
	both.Run.Slots = -1
	single := multiScenario()
	single.Layout = loop.Layout{}
	single.Groups = append([]loop.UserGroup(nil), single.Groups...)
	for i := range single.Groups {
		single.Groups[i].Placement, single.Groups[i].MaxDistanceM = loop.PlacementUniformArea, 500
	}
	for _, c := range []struct {
		name string
		sc   loop.Scenario
		want []string // field paths
	}{
		{"valid layout", multiScenario(), nil},
		{"wrap-around on one site", one, []string{"layout.wrap_around"}},
		{"loop's rule first", both, []string{"run.slots"}},
		{"single cell", single, nil},
	} {
		vs := Validate(norm(c.sc))
		var got []string
		for _, v := range vs {
			got = append(got, v.Field)
		}
		if !reflect.DeepEqual(got, c.want) {
			t.Errorf("%s: fields %v, want %v (%v)", c.name, got, c.want, vs)
		}
		if len(c.want) == 0 {
			continue
		}
		_, err := RunScenario(context.Background(), c.sc, loop.RunOptions{})
		if rv, ok := err.(loop.Violations); !ok || !reflect.DeepEqual(rv, vs) {
			t.Errorf("%s: RunScenario refused with %v, Validate said %v", c.name, err, vs)
		}
	}
}
