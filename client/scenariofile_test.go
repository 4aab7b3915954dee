package client

import (
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"
)

func TestParseTestdataScenarios(t *testing.T) {
	files, err := filepath.Glob("../testdata/scenarios/*")
	if err != nil {
		t.Fatal(err)
	}
	if len(files) < 5 {
		t.Fatalf("found %d scenario files, want at least 5", len(files))
	}
	for _, f := range files {
		t.Run(filepath.Base(f), func(t *testing.T) {
			sf, err := LoadScenarioFile(f)
			if err != nil {
				t.Fatal(err)
			}
			if len(sf.Scenario.GetGroups()) == 0 {
				t.Fatal("no groups parsed")
			}
			if sf.Line("groups[0].count") == 0 {
				t.Error("no line recorded for groups[0].count")
			}
			// Round trip: our JSON form parses back to the same message.
			js, err := MarshalScenarioJSON(sf.Scenario)
			if err != nil {
				t.Fatal(err)
			}
			back, err := ParseScenario("roundtrip.json", js)
			if err != nil {
				t.Fatal(err)
			}
			if !proto.Equal(sf.Scenario, back.Scenario) {
				t.Error("JSON round trip changed the scenario")
			}
		})
	}
}

// TestYAMLAndJSONAgree: the same scenario written in both forms gives the
// same message (YAML maps to the JSON form).
func TestYAMLAndJSONAgree(t *testing.T) {
	y := `
name: two forms
groups:
  - name: g
    count: 3
    placement: PLACEMENT_UNIFORM_AREA
    min_distance_m: 10
    max_distance_m: 1e3
    speeds: [{speed_kmh: 3, weight: 1}]
    profile: EPA
run: {slots: 1500, seed: 18446744073709551615}
`
	j := `{"name": "two forms", "groups": [{"name": "g", "count": 3, "placement": "PLACEMENT_UNIFORM_AREA",
  "minDistanceM": 10, "max_distance_m": 1000, "speeds": [{"speed_kmh": 3, "weight": 1}], "profile": "EPA"}],
  "run": {"slots": "1500", "seed": "18446744073709551615"}}`
	a, err := ParseScenario("a.yaml", []byte(y))
	if err != nil {
		t.Fatal(err)
	}
	b, err := ParseScenario("b.json", []byte(j))
	if err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(a.Scenario, b.Scenario) {
		t.Errorf("YAML and JSON differ:\n%v\n%v", a.Scenario, b.Scenario)
	}
	if a.Scenario.GetRun().GetSeed() != 18446744073709551615 {
		t.Errorf("seed = %d, want 2^64-1", a.Scenario.GetRun().GetSeed())
	}
	if got := a.Line("groups[0].max_distance_m"); got != 8 {
		t.Errorf("line of groups[0].max_distance_m = %d, want 8", got)
	}
	if got := a.Line("groups[0].speeds[0].speed_kmh"); got != 9 {
		t.Errorf("line of an unset field's parent = %d, want 9", got)
	}
}

func TestParseScenarioBadInput(t *testing.T) {
	tests := []struct {
		name, src string
		want      []string // each a substring of the error text
	}{
		{"unknown top-level field", "name: x\nstep_db: 1\n", []string{"bad.yaml:2: step_db: unknown field \"step_db\" in Scenario"}},
		{"unknown nested field", "inner_loop:\n  step_db: 1\n  stepsize_db: 2\n", []string{"bad.yaml:3: inner_loop.stepsize_db: unknown field"}},
		{"unknown field in a list item", "groups:\n  - count: 1\n  - count: 2\n    speed: 3\n", []string{"bad.yaml:4: groups[1].speed: unknown field"}},
		{"number expected", "inner_loop:\n  step_db: large\n", []string{"bad.yaml:2: inner_loop.step_db: must be a number"}},
		{"whole number expected", "run:\n  slots: 1.5\n", []string{"bad.yaml:2: run.slots: must be a whole number"}},
		{"negative unsigned", "run:\n  seed: -1\n", []string{"run.seed: must be a whole number >= 0"}},
		{"bad enum", "inner_loop:\n  mode: FAST\n", []string{"bad.yaml:2: inner_loop.mode: unknown value \"FAST\"", "INNER_MODE_CLOSED_LOOP"}},
		{"list expected", "groups: 3\n", []string{"bad.yaml:1: groups: must be a list"}},
		{"mapping expected", "receiver: 7\n", []string{"receiver: must be a mapping"}},
		{"bool expected", "outer_loop:\n  enabled: yes\n", []string{"outer_loop.enabled: must be true or false"}},
		{"duplicate", "name: a\nname: b\n", []string{"bad.yaml"}},
		{"syntax", "groups: [\n", []string{"bad.yaml", "syntax error"}},
		{"empty", "", []string{"file is empty"}},
		{"two problems at once", "nme: x\ninner_loop:\n  step_db: x\n", []string{"bad.yaml:1: nme: unknown field", "bad.yaml:3: inner_loop.step_db: must be a number"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ParseScenario("bad.yaml", []byte(tc.src))
			if err == nil {
				t.Fatal("no error")
			}
			if _, ok := err.(*ScenarioFileError); !ok {
				t.Errorf("error is %T, want *ScenarioFileError", err)
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not contain %q", err, w)
				}
			}
		})
	}
}

func TestLocateServerViolations(t *testing.T) {
	src := "name: x\ngroups:\n  - name: g\n    count: 0\n    speeds:\n      - speed_kmh: -3\n"
	sf, err := ParseScenario("s.yaml", []byte(src))
	if err != nil {
		t.Fatal(err)
	}
	e := sf.Locate("scenario", []FieldViolation{
		{Field: "scenario.groups[0].count", Rule: "value must be greater than or equal to 1"},
		{Field: "scenario.groups[0].speeds[0].speed_kmh", Rule: "value must be greater than or equal to 0"},
		{Field: "scenario.inner_loop.update_rate_hz", Rule: "value must be greater than 0"},
		{Field: "traces.decimation_slots", Rule: "value must be >= 0"},
	})
	want := "s.yaml:4: groups[0].count: value must be greater than or equal to 1\n" +
		"s.yaml:6: groups[0].speeds[0].speed_kmh: value must be greater than or equal to 0\n" +
		"s.yaml: inner_loop.update_rate_hz: value must be greater than 0\n" +
		"s.yaml: traces.decimation_slots: value must be >= 0"
	if e.Error() != want {
		t.Errorf("got\n%s\nwant\n%s", e.Error(), want)
	}
}

// TestViolationsInLineOrder: the server sorts violations by field path;
// the file's are listed by line (ties in the order given), then the
// file's without a line, then the command line's (Source set), so that a
// reader goes down the file once.
func TestViolationsInLineOrder(t *testing.T) {
	e := &ScenarioFileError{File: "s.yaml", Violations: []FileViolation{
		{Path: "inner_loop.step_db", Rule: "r55", Line: 55},
		{Source: "--axis 1", Rule: "axis"},
		{Path: "layout.handover.max_active", Rule: "r26", Line: 26},
		{Path: "groups", Rule: "no line"},
		{Path: "layout.sites", Rule: "r10a", Line: 10},
		{Path: "layout.sites", Rule: "r10b", Line: 10},
		{Path: "layout.sectors_per_site", Rule: "r11", Line: 11},
	}}
	want := "s.yaml:10: layout.sites: r10a\n" +
		"s.yaml:10: layout.sites: r10b\n" +
		"s.yaml:11: layout.sectors_per_site: r11\n" +
		"s.yaml:26: layout.handover.max_active: r26\n" +
		"s.yaml:55: inner_loop.step_db: r55\n" +
		"s.yaml: groups: no line\n" +
		"--axis 1: axis"
	if got := e.Error(); got != want {
		t.Errorf("got\n%s\nwant\n%s", got, want)
	}
	if e.Violations[0].Line != 55 {
		t.Error("Error reordered the violations in place")
	}
}
