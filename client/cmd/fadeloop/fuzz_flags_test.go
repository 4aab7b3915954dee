package main

import (
	"strings"
	"testing"
)

// FuzzAxisFlag: the --axis parser never panics; what it accepts has a path,
// either numbers (finite or not, the server judges them), names, or a range
// with a count of at least 1, never a mix of numbers and names.
func FuzzAxisFlag(f *testing.F) {
	for _, s := range []string{
		"inner_loop.step_db=0.5,1,2", "inner_loop.step_db=0.25:3:6", "inner_loop.step_db=0.25:3:6:log",
		"inner_loop.command=COMMAND_FIXED_STEP,COMMAND_ADAPTIVE", "groups[1].speed_kmh=3,30,120",
		"=1", "x=", "x=1:2", "x=1:2:0", "x=a,1", "x=1e400,NaN", "x=1:2:3:lin", "x=,,",
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		var a axisList
		if err := a.Set(s); err != nil {
			if len(a) != 0 {
				t.Fatalf("%q: error %v but an axis was added", s, err)
			}
			return
		}
		if len(a) != 1 {
			t.Fatalf("%q: %d axes", s, len(a))
		}
		ax := a[0]
		if strings.TrimSpace(ax.GetPath()) == "" {
			t.Fatalf("%q: accepted with an empty path", s)
		}
		if len(ax.GetNames()) > 0 && len(ax.GetValues()) > 0 {
			t.Fatalf("%q: mixes names and numbers", s)
		}
		if ax.GetCount() != 0 && ax.GetCount() < 1 {
			t.Fatalf("%q: range count %d", s, ax.GetCount())
		}
		if ax.GetCount() == 0 && len(ax.GetNames()) == 0 && len(ax.GetValues()) == 0 {
			t.Fatalf("%q: accepted with no values", s)
		}
	})
}

// FuzzConditionFlag: the --condition parser never panics and what it
// accepts has a name and at least one override with a path.
func FuzzConditionFlag(f *testing.F) {
	for _, s := range []string{"walk:groups[0].speeds[0].speed_kmh=3", "cars@2:groups[0].speeds[0].speed_kmh=60,groups[0].profile=VEHA",
		":x=1", "a:", "a@x:b=1", "a:b", "a:b=", "a@1e309:b=1"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		var c conditionList
		if err := c.Set(s); err != nil {
			return
		}
		if len(c) != 1 || strings.TrimSpace(c[0].GetName()) == "" || len(c[0].GetOverrides()) == 0 {
			t.Fatalf("%q: accepted %v", s, c)
		}
		for _, o := range c[0].GetOverrides() {
			if strings.TrimSpace(o.GetPath()) == "" {
				t.Fatalf("%q: override without a path", s)
			}
		}
	})
}
