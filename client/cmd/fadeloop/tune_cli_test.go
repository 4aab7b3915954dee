package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"google.golang.org/protobuf/encoding/protojson"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// tuneArgs is a short tune of the small scenario: two step sizes, two
// speeds, at most 4 replications of 600 slots (well under a second).
var tuneArgs = []string{"tune", "testdata/scenarios/small.json", "--slots", "600", "--quiet",
	"--axis", "inner_loop.step_db=0.5,1", "--speeds", "3,60", "--max-reps", "4"}

// stripEffortTiming removes effort.wall_time_s from a Recommendation's
// JSON, the only field that differs between identical requests.
func stripEffortTiming(t *testing.T, s string) string {
	t.Helper()
	var v map[string]any
	if err := json.Unmarshal([]byte(s), &v); err != nil {
		t.Fatalf("%v\n%s", err, s)
	}
	if ef, ok := v["effort"].(map[string]any); ok {
		delete(ef, "wall_time_s")
	}
	b, _ := json.Marshal(v)
	return string(b)
}

func TestTuneCommand(t *testing.T) {
	r := ok(t, tuneArgs...)
	// --speeds sets only speeds[0] of each group, so its conditions are
	// named by that path, never by a bare speed that reads as every user's.
	for _, want := range []string{"Verdict: ", "Runner-up:", "speeds[0].speed_kmh=3 ", "speeds[0].speed_kmh=60 ",
		"fixed power", "Condition speeds[0].speed_kmh=3:", "Condition speeds[0].speed_kmh=60:", "Effort:", "equal allocation", "[low, high]"} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("tune table lacks %q:\n%s", want, r.stdout)
		}
	}
	for _, bad := range []string{"Condition 3 km/h", "Condition 60 km/h", "\n3 km/h", "\n60 km/h"} {
		if strings.Contains(r.stdout, bad) {
			t.Errorf("tune table names a --speeds condition by a bare speed (%q):\n%s", bad, r.stdout)
		}
	}
	table := r.stdout

	r = ok(t, append(tuneArgs, "--format", "csv")...)
	rows, err := csv.NewReader(strings.NewReader(r.stdout)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	// 2 conditions × 2 candidates, 2 baselines, 2 overall candidates.
	if len(rows) != 1+4+2+2 || rows[0][0] != "scope" || rows[0][4] != "inner_loop.step_db" {
		t.Fatalf("tune CSV: %d rows, header %v", len(rows), rows[0])
	}
	best := 0
	for _, row := range rows[1:] {
		if len(row) != len(rows[0]) {
			t.Fatalf("row %v has %d cells, header %d", row, len(row), len(rows[0]))
		}
		if row[0] == "overall" && row[7] == "true" {
			best++
		}
	}
	if best != 1 {
		t.Errorf("%d overall rows marked best, want 1", best)
	}
	for _, row := range rows[1:] {
		if row[0] != "overall" && row[1] != "speeds[0].speed_kmh=3" && row[1] != "speeds[0].speed_kmh=60" {
			t.Errorf("CSV condition %q, want the --speeds condition named by its path", row[1])
		}
	}
	// The help says what --speeds changes and what it leaves alone.
	h := strings.Join(strings.Fields(ok(t, "tune", "--help").stdout), " ")
	for _, want := range []string{"sets only speeds[0].speed_kmh of every group", "other speeds entries keep their speeds", `"speeds[0].speed_kmh=60"`} {
		if !strings.Contains(h, want) {
			t.Errorf("tune --help lacks %q", want)
		}
	}

	a := ok(t, append(tuneArgs, "--format", "json")...)
	rec := &pb.Recommendation{}
	if err := protojson.Unmarshal([]byte(a.stdout), rec); err != nil {
		t.Fatalf("tune JSON is not a Recommendation: %v", err)
	}
	if len(rec.GetCandidates()) != 2 || len(rec.GetConditions()) != 2 || rec.GetOverall().GetSetting() == nil {
		t.Errorf("recommendation: %d candidates, %d conditions", len(rec.GetCandidates()), len(rec.GetConditions()))
	}
	// The table prints the API's own sentences (whitespace aside: the table
	// wraps them) and never a "winner" the verdict does not state.
	flat := strings.Join(strings.Fields(table), " ")
	ov := rec.GetOverall()
	lines := []string{ov.GetHeadline(), ov.GetRunnerUpLine()}
	for _, w := range ov.GetWarnings() {
		lines = append(lines, w.GetText())
	}
	for _, l := range lines {
		if l == "" || !strings.Contains(flat, strings.Join(strings.Fields(l), " ")) {
			t.Errorf("tune table lacks the API's line %q:\n%s", l, table)
		}
	}
	if ov.GetVerdict() != pb.Verdict_VERDICT_WINNER && strings.Contains(strings.ToLower(table), "winner") {
		t.Errorf("verdict %v but the table says winner:\n%s", ov.GetVerdict(), table)
	}
	addr := startServe(t)
	b := ok(t, append([]string{"--server", addr}, append(tuneArgs, "--format", "json")...)...)
	if stripEffortTiming(t, a.stdout) != stripEffortTiming(t, b.stdout) {
		t.Error("embedded and remote tune JSON differ for the same request")
	}
}

func TestTunePlotsAndRequestFile(t *testing.T) {
	dir := t.TempDir()
	heat := filepath.Join(dir, "heat.png")
	ok(t, "tune", "testdata/scenarios/small.json", "--slots", "600", "--quiet", "--max-reps", "4",
		"--axis", "inner_loop.step_db=0.5,1", "--axis", "inner_loop.update_rate_hz=750,1500", "--plot", heat)
	checkPNG(t, heat)
	steps := filepath.Join(dir, "steps.svg")
	req := filepath.Join(dir, "search.yaml")
	writeFile(t, req, `axes:
  - {path: inner_loop.step_db, first: 0.25, last: 1, count: 3, log: true}
conditions:
  - {name: walk, weight: 2, overrides: [{path: "groups[0].speeds[0].speed_kmh", number: 3}]}
  - {name: car, weight: 1, overrides: [{path: "groups[0].speeds[0].speed_kmh", number: 60}]}
objective: {kind: OBJECTIVE_KIND_MIN_OUTAGE}
budget: {max_replications: 4}
`)
	r := ok(t, "tune", "testdata/scenarios/small.json", "--slots", "600", "--quiet", "--request", req,
		"--plot", "steps="+steps, "--format", "csv")
	checkSVG(t, steps)
	// The log range 0.25..1 in 3 values is 0.25, 0.5, 1.
	for _, v := range []string{",0.25,", ",0.5,", ",1,"} {
		if !strings.Contains(r.stdout, "condition,walk,2,") || !strings.Contains(r.stdout, v) {
			t.Errorf("tune CSV from the request file lacks %q:\n%s", v, r.stdout)
		}
	}
}

func TestCapacityCommand(t *testing.T) {
	args := []string{"capacity", "testdata/scenarios/small.json", "--slots", "600", "--quiet",
		"--outage-limit", "0.05", "--max-count", "32", "--replications", "2"}
	r := ok(t, args...)
	for _, want := range []string{"Capacity", "Group 0", "Pole capacity (Gilhousen et al. 1991)", "count", "pass", "Effort:"} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("capacity table lacks %q:\n%s", want, r.stdout)
		}
	}
	r = ok(t, append(args, "--format", "csv")...)
	rows, err := csv.NewReader(strings.NewReader(r.stdout)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) < 3 || rows[0][0] != "count" || rows[0][2] != "pass" {
		t.Fatalf("capacity CSV: %d rows, header %v", len(rows), rows[0])
	}
	r = ok(t, append(args, "--format", "json")...)
	res := &pb.CapacityResult{}
	if err := protojson.Unmarshal([]byte(r.stdout), res); err != nil {
		t.Fatalf("capacity JSON is not a CapacityResult: %v", err)
	}
	if len(res.GetEvaluated()) != len(rows)-1 || res.GetPole() <= 0 {
		t.Errorf("capacity JSON: %d evaluated counts (CSV %d rows), pole %g", len(res.GetEvaluated()), len(rows)-1, res.GetPole())
	}
}

func TestSearchCommandsBadInput(t *testing.T) {
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"tune", "--axis", "inner_loop.no_such_db=1,2"}, "axes[0].path"},
		{[]string{"tune", "--axis", "inner_loop.step_db=1,2", "--objective", "fastest"}, "--objective"},
		{[]string{"tune", "--axis", "inner_loop.step_db=1,2", "--objective", "power"}, "outage_limit"},
		{[]string{"tune"}, "no axes"},
		{[]string{"tune", "--axis", "inner_loop.step_db=1,2", "--condition", "x@0:groups[0].count=3"}, "conditions[0].weight"},
		{[]string{"tune", "--axis", "inner_loop.step_db=1,2", "--plot", "heatmap=x.png"}, "heatmap"},
		{[]string{"capacity"}, "--outage-limit"},
		{[]string{"capacity", "--outage-limit", "0.05", "--group", "9"}, "group"},
		{[]string{"capacity", "--outage-limit", "0.05", "--group", "-1"}, "--group -1"},
	}
	for _, c := range cases {
		r := fl(t, c.args...)
		r.want(t, exitBadInput, c.args...)
		if !strings.Contains(r.stderr, c.want) {
			t.Errorf("fadeloop %s: stderr does not name %q:\n%s", strings.Join(c.args, " "), c.want, r.stderr)
		}
	}
	for _, cmd := range []string{"tune", "capacity"} {
		r := ok(t, cmd, "--help")
		if !strings.Contains(r.stdout, "Examples:") || !strings.Contains(r.stdout, "fadeloop "+cmd) {
			t.Errorf("%s --help lacks examples:\n%s", cmd, r.stdout)
		}
	}
}

func writeFile(t *testing.T, path, content string) {
	t.Helper()
	if err := os.WriteFile(path, []byte(content), 0o644); err != nil {
		t.Fatal(err)
	}
}

// TestTuneInterruptCancels sends SIGINT during a long search: the CLI must
// stop, exit 1 and say that it was cancelled. The search asked for is about
// 2 candidates × 2 replications + 2 baselines of 24 users × 20 000 000
// slots, some 3·10⁹ user-slots: hours on this machine. Ending within the
// 60 s hang guard shows the cancel reached the server's runs (work-based,
// not a wall-clock bound: it holds on a busy machine).
func TestTuneInterruptCancels(t *testing.T) {
	cmd := exec.Command(flBinary(t), "tune", "--slots", "20000000", "--axis", "inner_loop.step_db=0.5,1",
		"--max-reps", "2", "--progress", "lines")
	cmd.Dir = repoRoot
	var se bytes.Buffer
	cmd.Stderr = &se
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	time.Sleep(1500 * time.Millisecond) // let the candidates' runs get going
	if err := cmd.Process.Signal(syscall.SIGINT); err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- cmd.Wait() }()
	select {
	case err := <-done:
		ee, isExit := err.(*exec.ExitError)
		if !isExit || ee.ExitCode() != exitFailure {
			t.Errorf("exit after SIGINT: %v, want status 1\n%s", err, se.String())
		}
		if !strings.Contains(se.String(), "cancelled") {
			t.Errorf("stderr does not say cancelled:\n%s", se.String())
		}
	case <-time.After(60 * time.Second):
		cmd.Process.Kill()
		t.Fatal("still running 60 s after SIGINT: the cancel did not stop the search")
	}
}

// TestConstraintsUnmetExit4: a capacity search whose smallest count already
// misses the outage limit writes its report and exits 4, apart from bad
// input (2) and an unreachable server (3). The counts are above the pole
// capacity the command itself prints for this scenario (82.9 users,
// Gilhousen et al. 1991), so no count can keep outage at 0.01 %.
func TestConstraintsUnmetExit4(t *testing.T) {
	args := []string{"capacity", "testdata/scenarios/small.json", "--slots", "600", "--quiet",
		"--outage-limit", "0.0001", "--min-count", "90", "--max-count", "100", "--replications", "2", "--format", "json"}
	r := fl(t, args...)
	if r.code != exitConstraintsUnmet || !strings.Contains(r.stderr, "no candidate meets the constraints") {
		t.Fatalf("exit %d, want 4\n%s", r.code, r.stderr)
	}
	res := &pb.CapacityResult{}
	if err := protojson.Unmarshal([]byte(r.stdout), res); err != nil || !res.GetBelowRange() {
		t.Errorf("report not written or not below range: %v, %v", err, res)
	}
}

func TestTuneConstraints(t *testing.T) {
	unmet := &pb.Decision{ConstraintsUnmet: true, Reason: "r"}
	for _, c := range []struct {
		rec  *pb.Recommendation
		want bool
	}{
		{&pb.Recommendation{Overall: &pb.Decision{}}, false},
		{&pb.Recommendation{Overall: unmet}, true},
		{&pb.Recommendation{Overall: &pb.Decision{}, Conditions: []*pb.ConditionResult{{Name: "fast", Decision: unmet}}}, true},
	} {
		err := tuneConstraints(c.rec)
		var cu constraintsUnmet
		if got := errors.As(err, &cu); got != c.want || report(io.Discard, "tune", err) != map[bool]int{true: exitConstraintsUnmet, false: exitOK}[c.want] {
			t.Errorf("%v: %v, want unmet %v", c.rec, err, c.want)
		}
	}
}

// TestTuneConstraintsFollowsTheVerdict: exit status 4 follows the verdict
// field of the overall decision or of any condition, and its message is
// the decision's headline.
func TestTuneConstraintsFollowsTheVerdict(t *testing.T) {
	unmet := &pb.Decision{Verdict: pb.Verdict_VERDICT_CONSTRAINTS_UNMET, Headline: "Constraints unmet: closest step_db=1."}
	win := &pb.Decision{Verdict: pb.Verdict_VERDICT_WINNER, Headline: "Winner: step_db=1."}
	tests := []struct {
		name string
		rec  *pb.Recommendation
		want string // "" for no error
	}{
		{"winner", &pb.Recommendation{Overall: win, Conditions: []*pb.ConditionResult{{Name: "a", Decision: win}}}, ""},
		{"overall unmet", &pb.Recommendation{Overall: unmet}, "Constraints unmet: closest step_db=1."},
		{"one condition unmet", &pb.Recommendation{Overall: win, Conditions: []*pb.ConditionResult{{Name: "a", Decision: win}, {Name: "b", Decision: unmet}}},
			"condition b: Constraints unmet"},
		{"tie", &pb.Recommendation{Overall: &pb.Decision{Verdict: pb.Verdict_VERDICT_TIE, TieSet: []int32{0, 1}}}, ""},
	}
	for _, tc := range tests {
		err := tuneConstraints(tc.rec)
		var cu constraintsUnmet
		switch {
		case tc.want == "" && err != nil:
			t.Errorf("%s: %v, want no error", tc.name, err)
		case tc.want != "" && (!errors.As(err, &cu) || !strings.Contains(err.Error(), tc.want)):
			t.Errorf("%s: %v, want constraintsUnmet with %q", tc.name, err, tc.want)
		case tc.want != "" && report(io.Discard, "tune", err) != exitConstraintsUnmet:
			t.Errorf("%s: exit status not 4", tc.name)
		}
	}
}

// TestReportFlag: --report FILE.html on run, tune and capacity writes the
// HTML report of the same result the command printed (the tune page
// carries the API's headline); a name without .html is bad input (exit 2)
// before any work.
func TestReportFlag(t *testing.T) {
	dir := t.TempDir()
	cases := []struct {
		args []string
		want string // in the page
	}{
		{[]string{"run", "testdata/scenarios/small.json", "--slots", "600", "--quiet"}, "Figures"},
		{append(append([]string{}, tuneArgs...), "--format", "json"), "Verdict: "},
		{[]string{"capacity", "testdata/scenarios/small.json", "--slots", "600", "--quiet",
			"--outage-limit", "0.05", "--max-count", "8", "--replications", "2"}, "Capacity"},
	}
	for _, c := range cases {
		page := filepath.Join(dir, c.args[0]+".html")
		r := ok(t, append(c.args, "--report", page)...)
		b, err := os.ReadFile(page)
		if err != nil {
			t.Fatalf("%s --report: %v", c.args[0], err)
		}
		html := string(b)
		if !strings.HasPrefix(strings.TrimSpace(html), "<!DOCTYPE html>") || !strings.Contains(html, c.want) {
			t.Errorf("%s report lacks %q (%d bytes)", c.args[0], c.want, len(html))
		}
		if c.args[0] == "tune" {
			rec := &pb.Recommendation{}
			if err := protojson.Unmarshal([]byte(r.stdout), rec); err != nil {
				t.Fatal(err)
			}
			// html/template escapes some characters; compare a plain prefix.
			h := rec.GetOverall().GetHeadline()
			if len(h) > 20 {
				h = h[:20]
			}
			if h == "" || !strings.Contains(html, h) {
				t.Errorf("tune report lacks the API's headline %q", h)
			}
		}
	}
	r := fl(t, "run", "--slots", "600", "--report", filepath.Join(dir, "page.txt"))
	if r.code != 2 || !strings.Contains(r.stderr, "FILE.html") {
		t.Errorf("--report page.txt: exit %d, %s", r.code, r.stderr)
	}
}

// TestTuneOnLayout: tune on the README's multi-cell example with a
// handover-window axis (21 cells × 9 users, 600 slots, 2 replications:
// about 0.7 M user-slots). The automatic plot is the axis plot (steps and
// heatmap cannot draw a window axis) and the message names the kind drawn;
// the missing fixed-power baseline is explained; counts of one are
// singular; the high-outage warning, if any, is at the user's
// --outage-limit, not the 10 % default. Axes no kind can draw are refused
// before any work, naming the kinds that would.
func TestTuneOnLayout(t *testing.T) {
	dir := t.TempDir()
	town := filepath.Join(dir, "town.yaml")
	writeFile(t, town, ok(t, "example", "--multi-cell").stdout)
	png := filepath.Join(dir, "tune.png")
	args := []string{"tune", town, "--store", filepath.Join(dir, "store"), "--slots", "600", "--min-reps", "2", "--max-reps", "2",
		"--axis", "layout.handover.window_db=2,6", "--objective", "power", "--outage-limit", "0.12", "--plot", png}
	r := fl(t, args...)
	if r.code != exitOK && r.code != exitConstraintsUnmet {
		r.want(t, exitOK, args...)
	}
	checkPNG(t, png)
	if !strings.Contains(r.stderr, "wrote axis plot to "+png) {
		t.Errorf("stderr does not name the kind drawn:\n%s", r.stderr)
	}
	for _, want := range []string{"2 candidates × 1 condition;", "no fixed-power baseline is run in multi-cell mode", "in 1 round "} {
		if !strings.Contains(strings.ReplaceAll(r.stdout, "\n  ", " "), want) {
			t.Errorf("tune table lacks %q:\n%s", want, r.stdout)
		}
	}
	for _, never := range []string{"1 conditions", "1 rounds", "warning level of 10.00 %", "Closest setting misses"} {
		if strings.Contains(r.stdout, never) {
			t.Errorf("tune table says %q:\n%s", never, r.stdout)
		}
	}
	// The same job again (its replications come from the store) as JSON:
	// the request carried the user's 12 % as the warning level.
	r = fl(t, append(args, "--format", "json")...)
	rec := &pb.Recommendation{}
	if err := protojson.Unmarshal([]byte(r.stdout), rec); err != nil {
		t.Fatalf("tune JSON: %v\n%s", err, r.stderr)
	}
	if w := rec.GetObjective().GetOutageWarning(); w != 0.12 {
		t.Errorf("outage warning level %g, want the --outage-limit 0.12", w)
	}

	bad := []string{"tune", town, "--store", filepath.Join(dir, "store"), "--slots", "600",
		"--axis", "layout.handover.window_db=2,6", "--axis", "inner_loop.update_rate_hz=750,1500", "--plot", filepath.Join(dir, "x.png")}
	r = fl(t, bad...)
	r.want(t, exitBadInput, bad...)
	for _, want := range []string{"no plot kind draws", "heatmap needs", "steps", "axis any one axis"} {
		if !strings.Contains(r.stderr, want) {
			t.Errorf("refusal lacks %q:\n%s", want, r.stderr)
		}
	}

	h := ok(t, "tune", "--help").stdout
	for _, want := range []string{"axis     the same against any one axis", "axis for any", "multi-cell mode (layout.sites set), which\nruns none"} {
		if !strings.Contains(h, want) {
			t.Errorf("tune --help lacks %q", want)
		}
	}
}
