package loop

import (
	"crypto/sha256"
	"fmt"
	"os"
	"testing"
)

// TestFingerprintDump writes the JSON of fixed-seed reports to the file
// named by FADELOOP_FINGERPRINT (refactoring aid: compare before/after).
func TestFingerprintDump(t *testing.T) {
	path := os.Getenv("FADELOOP_FINGERPRINT")
	if path == "" {
		t.Skip("set FADELOOP_FINGERPRINT")
	}
	c := CanonicalScenario()
	c.Run.Slots, c.Run.WarmupSlots = 6000, 600
	c2 := c
	c2.Groups = append([]UserGroup(nil), c.Groups...)
	c2.OuterLoop.Enabled = true
	id := baseScenario(4, 4000)
	id.InnerLoop.Mode = InnerModeIdeal
	out := ""
	for i, sc := range []Scenario{c, c2, richScenario(), id} {
		opts := RunOptions{}
		if i == 2 {
			opts.Trace = TraceOptions{Users: []int{0, 7}, Decimation: 7}
		}
		j := reportJSON(t, mustRun(t, sc, nil, opts))
		out += fmt.Sprintf("%d %x\n%s\n", i, sha256.Sum256([]byte(j)), j)
	}
	g := [][]float64{{1, 0.1}, {0.2, 1}}
	j := reportJSON(t, fmMatrix(t, g, 5, 0.01, InnerModeClosedLoop, 0.5))
	out += fmt.Sprintf("fm %x\n%s\n", sha256.Sum256([]byte(j)), j)
	if err := os.WriteFile(path, []byte(out), 0o644); err != nil {
		t.Fatal(err)
	}
}
