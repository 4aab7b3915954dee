package main

import (
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/fadeloop/fadeloop/client/render"
	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
)

// An axis value that makes a multi-cell scenario invalid for the
// multi-cell engine (layout.sites = 1 with wrap-around on, a rule of
// loop/multicell's Layout) is rejected before any work, named by its
// --axis flag and value, and counted as the command line's problem — on
// the direct path, on the job queue, and in tune. Before, the direct sweep
// blamed the file ("town.yaml: layout.wrap_around: …"), the queued sweep
// failed the point after 3 attempts, and tune blamed the file's line.
func TestAxisValueInvalidForLayoutNamesFlag(t *testing.T) {
	dir := t.TempDir()
	town := filepath.Join(dir, "town.yaml")
	if err := os.WriteFile(town, multiCellScenarioYAML, 0o644); err != nil {
		t.Fatal(err)
	}
	const want = "--axis 2: layout.sites = 1 makes layout.wrap_around invalid: needs 7 or 19 sites, got 1\n"
	for _, args := range [][]string{
		{"sweep", town, "--axis", "layout.handover.window_db=1,3", "--axis", "layout.sites=1,7", "--slots", "600", "--direct"},
		{"sweep", town, "--axis", "layout.handover.window_db=1,3", "--axis", "layout.sites=1,7", "--slots", "600"},
		{"tune", town, "--axis", "layout.handover.window_db=1,3", "--axis", "layout.sites=1,7", "--slots", "600", "--direct"},
	} {
		r := fl(t, args...)
		tail := "fadeloop " + args[0] + ": 1 problem in the command line\n"
		if r.code != exitBadInput || r.stderr != want+tail {
			t.Errorf("%v: exit %d, want 2 and stderr\n%s%s\ngot:\n%s", args, r.code, want, tail, r.stderr)
		}
	}
	// A combination of values that only together break a rule names the
	// grid point, on both paths, as the --axis flags' problem.
	for _, args := range [][]string{
		{"sweep", town, "--axis", "layout.sites=7,19", "--axis", "groups[0].count=6,400", "--slots", "600", "--direct"},
		{"sweep", town, "--axis", "layout.sites=7,19", "--axis", "groups[0].count=6,400", "--slots", "600"},
	} {
		r := fl(t, args...)
		want := "--axis: at grid point 3 (sites=19, groups[0].count=400): groups: the layout holds 22971 users, more than 20000\n" +
			"fadeloop sweep: 1 problem in the command line\n"
		if r.code != exitBadInput || r.stderr != want {
			t.Errorf("%v: exit %d, want 2 and stderr\n%s\ngot:\n%s", args, r.code, want, r.stderr)
		}
	}
}

// Problems of a scenario file are listed in line order, without the
// validator's rule ids, an allowed-value list or range that admits 0 says
// what 0 means, and the value given follows the rule. Lines: sites 10,
// sectors_per_site 11, window_db 24, max_active 26 of the multi-cell
// example (the edits below keep them).
func TestScenarioProblemsReadable(t *testing.T) {
	src := string(multiCellScenarioYAML)
	for _, e := range []struct{ from, to string }{
		{"\n  sites: 7 ", "\n  sites: 5 "},
		{"sectors_per_site: 3 ", "sectors_per_site: 2 "},
		{"window_db: 3 ", "window_db: 30 "},
		{"max_active: 3", "max_active: 9"},
	} {
		if !strings.Contains(src, e.from) {
			t.Fatalf("example has no %q", e.from)
		}
		src = strings.Replace(src, e.from, e.to, 1)
	}
	bad := filepath.Join(t.TempDir(), "bad.yaml")
	if err := os.WriteFile(bad, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	r := fl(t, "run", bad)
	// Defaults named (loop.Scenario.Normalise): sectors_per_site 1,
	// max_active loop.DefaultMaxActive = 3.
	want := []string{
		":10: layout.sites: must be in list [1, 7, 19] (0 or unset: single cell, no layout), got 5",
		":11: layout.sectors_per_site: must be in list [1, 3] (0 or unset: default 1), got 2",
		":24: layout.handover.window_db: must be greater than or equal to 0 and less than or equal to 20, got 30",
		":26: layout.handover.max_active: must be greater than or equal to 0 and less than or equal to 6 (0 or unset: default 3), got 9",
		"fadeloop run: 4 problems in " + bad,
	}
	lines := strings.Split(strings.TrimSpace(r.stderr), "\n")
	if r.code != exitBadInput || len(lines) != len(want) {
		t.Fatalf("exit %d, want 2 and %d lines:\n%s", r.code, len(want), r.stderr)
	}
	for i, w := range want {
		if !strings.HasSuffix(lines[i], w) {
			t.Errorf("line %d: %q, want it to end in %q", i+1, lines[i], w)
		}
	}
	if regexp.MustCompile(`\[[a-z0-9]+\.[a-z_]+\]`).MatchString(r.stderr) {
		t.Errorf("a validator rule id is shown:\n%s", r.stderr)
	}
}

// The FULL fading link limit names its remedy. 7 sites × 3 sectors = 21
// cells; 30 + 3 users per cell = 693 users; 693 × 21 = 14553 links.
func TestFullFadingLimitNamesRemedy(t *testing.T) {
	src := strings.Replace(string(multiCellScenarioYAML), "fast_fading: FAST_FADING_SLOW_TOWARD_OTHERS", "fast_fading: FAST_FADING_FULL", 1)
	src = strings.Replace(src, "count: 6 ", "count: 30 ", 1)
	bad := filepath.Join(t.TempDir(), "full.yaml")
	if err := os.WriteFile(bad, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	r := fl(t, "run", bad, "--slots", "600")
	want := "layout.propagation.fast_fading: FAST_FADING_FULL needs users × cells <= 8192, got 14553 (693 users × 21 cells): use FAST_FADING_SLOW_TOWARD_OTHERS, or fewer sites, sectors or users per cell"
	if r.code != exitBadInput || !strings.Contains(r.stderr, want) {
		t.Errorf("exit %d, want 2 and %q:\n%s", r.code, want, r.stderr)
	}
}

// --help of the commands a layout study uses reads in columns: no flag's
// name and placeholder pushes every description onto a line of its own
// (pflag does that when the widest flag column takes more than half of
// the 80 columns; tune's --condition placeholder did), and no flag shows
// two defaults (a "(0: …)" or "(default …)" of its own and pflag's
// generated one, as --timeout's "(0: none) (default 0s)" and
// "(default 0 axes)" did). The description column starts at most at
// column 40.
func TestHelpColumnsAndDefaults(t *testing.T) {
	// pflag's layout: "  -h, --help  …" or "      --name PLACEHOLDER  …";
	// wrapped description lines are indented further.
	flagStart := regexp.MustCompile(`^(  -\w, |      )--[a-z]`)
	flagLine := regexp.MustCompile(`^(  -\w, |      )--[a-z-]+( \S+)?\s{2,}\S`)
	twoDefaults := regexp.MustCompile(`\((0:|default)[^()]*\) \(default|\(default 0 [a-z]+\)`)
	for _, cmd := range []string{"run", "sweep", "tune", "capacity", "example", "info"} {
		h := ok(t, cmd, "--help")
		_, flags, found := strings.Cut(h.stdout, "\nFlags:\n")
		if !found {
			t.Errorf("%s --help has no Flags section:\n%s", cmd, h.stdout)
			continue
		}
		seen := 0
		for _, l := range strings.Split(flags, "\n") {
			if !flagStart.MatchString(l) {
				continue
			}
			seen++
			loc := flagLine.FindStringIndex(l)
			if loc == nil {
				t.Errorf("%s --help: flag line without its description beside it: %q", cmd, l)
				continue
			}
			if col := loc[1] - 1; col > 40 {
				t.Errorf("%s --help: description starts at column %d (> 40): %q", cmd, col, l)
			}
		}
		if seen < 3 {
			t.Errorf("%s --help: %d flag lines found:\n%s", cmd, seen, flags)
		}
		flat := strings.Join(strings.Fields(flags), " ")
		if m := twoDefaults.FindString(flat); m != "" {
			t.Errorf("%s --help shows two defaults: %q", cmd, m)
		}
	}
	// example writes YAML by default, and its help says so.
	if h := ok(t, "example", "--help").stdout; !strings.Contains(strings.Join(strings.Fields(h), " "), "example: yaml (its default) or json") {
		t.Errorf("example --help does not give its own --format default:\n%s", h)
	}
}

// info says what the user limit counts and lists the multi-cell limits
// from loop/multicell (this build's engine; the server's answer has no
// field for them).
func TestInfoMulticellLimits(t *testing.T) {
	out := ok(t, "info").stdout
	q := regexp.QuoteMeta
	for _, want := range []*regexp.Regexp{
		regexp.MustCompile(`users per scenario \(layout: per cell\)\s+` + q(render.GroupDigits(loop.MaxUsers))),
		regexp.MustCompile(q("multi-cell limits of this client's engine " + multicell.EngineVersion + " (not in the server's answer)")),
		regexp.MustCompile(`users in a layout \(all cells\)\s+` + q(render.GroupDigits(multicell.MaxUsers))),
		regexp.MustCompile(`users per cell in one group \(count\)\s+` + q(render.GroupDigits(multicell.MaxGroupSize))),
		regexp.MustCompile(`users × cells with FAST_FADING_FULL\s+` + q(render.GroupDigits(multicell.MaxFullFadingLinks))),
	} {
		if !want.MatchString(out) {
			t.Errorf("info lacks %v:\n%s", want, out)
		}
	}
}
