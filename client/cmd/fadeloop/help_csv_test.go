package main

import (
	"regexp"
	"strings"
	"testing"
)

// TestOutputFormatsHelpCSVColumns: the "Output formats" text of run,
// sweep, tune and capacity names the interval columns as the CSV files
// write them (client/render's TestCSVIntervalColumns checks the files):
// F_ci_low and F_ci_high everywhere, objective_ci_* and diff_to_best_ci_*
// in tune; never the old F_low / diff_low names.
func TestOutputFormatsHelpCSVColumns(t *testing.T) {
	old := regexp.MustCompile(`\bF_low\b|\bF_high\b|\bdiff_low\b|\bdiff_high\b|\bobjective_low\b|\bobjective_high\b`)
	for _, tc := range []struct {
		cmd  string
		want []string
	}{
		{"run", []string{"F_ci_low", "F_ci_high", "95 %"}},
		{"sweep", []string{"F_ci_low", "F_ci_high", "95 % interval [low, high]"}},
		{"tune", []string{"F_ci_low", "F_ci_high", "objective_ci_low", "objective_ci_high", "diff_to_best_ci_low", "diff_to_best_ci_high"}},
		{"capacity", []string{"F_ci_low", "F_ci_high"}},
	} {
		h := ok(t, tc.cmd, "--help").stdout
		i := strings.Index(h, "Output formats:")
		if i < 0 {
			t.Errorf("%s --help has no Output formats", tc.cmd)
			continue
		}
		// The paragraph up to the next section (a blank line, then text
		// at the margin).
		formats := h[i:]
		if j := regexp.MustCompile(`\n\n\S`).FindStringIndex(formats); j != nil {
			formats = formats[:j[0]]
		}
		flat := strings.Join(strings.Fields(formats), " ")
		for _, w := range tc.want {
			if !strings.Contains(flat, w) {
				t.Errorf("%s --help Output formats lacks %q:\n%s", tc.cmd, w, formats)
			}
		}
		if m := old.FindString(formats); m != "" {
			t.Errorf("%s --help names the old column %q", tc.cmd, m)
		}
		if strings.Contains(formats, "95 % CI") {
			t.Errorf("%s --help says 95 %% CI (the tables say 95 %% interval)", tc.cmd)
		}
	}
}
