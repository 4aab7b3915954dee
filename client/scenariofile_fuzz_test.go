package client

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"testing"
)

// FuzzParseScenario feeds arbitrary text to the scenario-file reader (JSON
// or YAML). It must never panic; a rejection is a *ScenarioFileError with
// at least one violation, each with a rule and a line inside the file (or
// 0); an accepted file must survive the round trip through its JSON form
// (MarshalScenarioJSON, then ParseScenario) unchanged.
func FuzzParseScenario(f *testing.F) {
	files, err := filepath.Glob("../testdata/scenarios/*")
	if err != nil {
		f.Fatal(err)
	}
	for _, p := range files {
		b, err := os.ReadFile(p)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
	for _, s := range []string{
		"", "{}", "[]", "null", "name: x\n", "groups: [{count: 3}]\n",
		"run: {seed: \"18446744073709551615\"}\n", "run: {seed: -1}\n",
		"groups:\n  - &g {count: 2}\n  - *g\n",
		// Aliases that expand exponentially (YAML "billion laughs").
		"a: &a [x, x, x, x, x, x, x, x, x]\nb: &b [*a, *a, *a, *a, *a, *a, *a, *a, *a]\nc: &c [*b, *b, *b, *b, *b, *b, *b, *b, *b]\nd: [*c, *c, *c, *c, *c, *c, *c, *c, *c]\n",
		"inner_loop: {mode: INNER_MODE_CLOSED_LOOP, step_db: .nan}\n",
		"{\"run\": {\"slots\": 1e400}}", "{\"groups\": [{\"count\": 1.5}]}",
		"link: {kind: 7}\n", "\t", "---\n---\n", "!!binary AAAA",
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) > 64<<10 {
			return
		}
		sf, err := ParseScenario("fuzz.yaml", data)
		if err != nil {
			var fe *ScenarioFileError
			if !errors.As(err, &fe) {
				t.Fatalf("error %T %v, want *ScenarioFileError", err, err)
			}
			if len(fe.Violations) == 0 {
				t.Fatal("ScenarioFileError without violations")
			}
			lines := bytes.Count(data, []byte("\n")) + 1
			for _, v := range fe.Violations {
				if v.Rule == "" {
					t.Errorf("violation without a rule: %+v", v)
				}
				if v.Line < 0 || v.Line > lines+1 {
					t.Errorf("violation at line %d of a %d-line file: %+v", v.Line, lines, v)
				}
			}
			return
		}
		if sf.Scenario == nil {
			t.Fatal("accepted file without a scenario")
		}
		js, err := MarshalScenarioJSON(sf.Scenario)
		if err != nil {
			t.Fatalf("accepted scenario does not marshal: %v", err)
		}
		back, err := ParseScenario("roundtrip.json", js)
		if err != nil {
			t.Fatalf("our JSON form of an accepted file is rejected: %v\n%s", err, js)
		}
		js2, err := MarshalScenarioJSON(back.Scenario)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(js, js2) {
			t.Fatalf("round trip changed the scenario:\n%s\n---\n%s", js, js2)
		}
	})
}
