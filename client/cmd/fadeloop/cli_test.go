package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"
	"unicode/utf8"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/render"
)

// The tests run the real binary in its own process, built once per test
// run into a temporary directory.
var (
	buildOnce sync.Once
	binPath   string
	buildErr  error
	buildDir  string
)

// testStore is the root of the job stores of every run of the binary
// (FADELOOP_STORE, inherited by the child processes): the tests never
// write to the real user cache.
var testStore string

func TestMain(m *testing.M) {
	var err error
	if testStore, err = os.MkdirTemp("", "fadeloop-cli-store-"); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	os.Setenv("FADELOOP_STORE", testStore)
	code := m.Run()
	if buildDir != "" {
		os.RemoveAll(buildDir)
	}
	os.RemoveAll(testStore)
	os.Exit(code)
}

func flBinary(t *testing.T) string {
	t.Helper()
	buildOnce.Do(func() {
		buildDir, buildErr = os.MkdirTemp("", "fadeloop-cli-test-")
		if buildErr != nil {
			return
		}
		binPath = filepath.Join(buildDir, "fadeloop")
		// Built without -race even under "go test -race": the CLI's own
		// code is exercised by these runs, the race detector would only
		// slow the engine down tenfold.
		out, err := exec.Command("go", "build", "-o", binPath, ".").CombinedOutput()
		if err != nil {
			buildErr = fmt.Errorf("go build: %v\n%s", err, out)
		}
	})
	if buildErr != nil {
		t.Fatal(buildErr)
	}
	return binPath
}

type result struct {
	code           int
	stdout, stderr string
}

// fl runs the binary with args (working directory: the repository root, so
// that testdata paths read as in the README).
func fl(t *testing.T, args ...string) result {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, flBinary(t), args...)
	cmd.Dir = repoRoot
	var so, se bytes.Buffer
	cmd.Stdout, cmd.Stderr = &so, &se
	err := cmd.Run()
	code := 0
	if ee, ok := err.(*exec.ExitError); ok {
		code = ee.ExitCode()
	} else if err != nil {
		t.Fatalf("fadeloop %v: %v", args, err)
	}
	return result{code, so.String(), se.String()}
}

func (r result) want(t *testing.T, code int, args ...string) {
	t.Helper()
	if r.code != code {
		t.Fatalf("fadeloop %s: exit %d, want %d\nstdout:\n%s\nstderr:\n%s", strings.Join(args, " "), r.code, code, r.stdout, r.stderr)
	}
}

func ok(t *testing.T, args ...string) result {
	t.Helper()
	r := fl(t, args...)
	r.want(t, 0, args...)
	return r
}

const repoRoot = "../../.."

// shortSlots is the run length used by the scenario tests: 1 s of slots
// under -short, 4 s otherwise.
func shortSlots() string {
	if testing.Short() {
		return "1500"
	}
	return "6000"
}

func scenarioFiles(t *testing.T) []string {
	t.Helper()
	files, err := filepath.Glob(filepath.Join(repoRoot, "testdata/scenarios/*"))
	if err != nil || len(files) < 5 {
		t.Fatalf("testdata scenarios: %v, %d files", err, len(files))
	}
	var rel []string
	for _, f := range files {
		r, _ := filepath.Rel(repoRoot, f)
		rel = append(rel, r)
	}
	return rel
}

// TestRunEveryScenario runs each file in testdata/scenarios and checks the
// report against the file: user count, seed and run length.
func TestRunEveryScenario(t *testing.T) {
	for _, f := range scenarioFiles(t) {
		t.Run(filepath.Base(f), func(t *testing.T) {
			r := ok(t, "run", f, "--slots", shortSlots(), "--replications", "1", "--format", "json", "--quiet")
			var rep struct {
				Aggregate struct {
					Users             int                     `json:"users"`
					SirErrorStdDb     struct{ Value float64 } `json:"sir_error_std_db"`
					OutageProbability struct{ Value float64 } `json:"outage_probability"`
				} `json:"aggregate"`
				Slots string `json:"slots"`
				Seed  string `json:"seed"`
			}
			if err := json.Unmarshal([]byte(r.stdout), &rep); err != nil {
				t.Fatalf("json output: %v\n%s", err, r.stdout)
			}
			sf, err := client.LoadScenarioFile(filepath.Join(repoRoot, f))
			if err != nil {
				t.Fatal(err)
			}
			users := 0
			for _, g := range sf.Scenario.GetGroups() {
				users += int(g.GetCount())
			}
			if l := sf.Scenario.GetLayout(); l.GetSites() > 0 {
				users *= int(l.GetSites() * max(1, l.GetSectorsPerSite())) // counts are per cell
			}
			if rep.Aggregate.Users != users {
				t.Errorf("report has %d users, file %d", rep.Aggregate.Users, users)
			}
			if want := fmt.Sprint(sf.Scenario.GetRun().GetSeed()); rep.Seed != want && !(want == "0" && rep.Seed == "") {
				t.Errorf("report seed %q, file %s", rep.Seed, want)
			}
			if p := rep.Aggregate.OutageProbability.Value; p < 0 || p > 1 {
				t.Errorf("outage probability %g outside [0, 1]", p)
			}
			if s := rep.Aggregate.SirErrorStdDb.Value; !(s > 0) {
				t.Errorf("SIR error std %g, want > 0 for a fading channel", s)
			}
		})
	}
}

// TestRunDefault is the README's first command: the embedded default
// scenario, a readable table.
func TestRunDefault(t *testing.T) {
	args := []string{"run"}
	if testing.Short() {
		args = append(args, "--slots", "3000")
	}
	r := ok(t, args...)
	for _, want := range []string{"suburban macro cell", "figure", "SIR error std (dB)", "outage (%)",
		"mean Tx power (dBm)", "per distance bin", "95 % interval"} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("table lacks %q:\n%s", want, r.stdout)
		}
	}
	// Columns are aligned: every row of the figure table has its value
	// ending in the same column.
	lines := strings.Split(r.stdout, "\n")
	var ends []int
	in := false
	for _, l := range lines {
		if strings.HasPrefix(l, "figure ") {
			in = true
			ends = append(ends, utf8.RuneCountInString(l[:strings.Index(l, "value")+len("value")]))
			continue
		}
		if in && l == "" {
			break
		}
		if in {
			m := regexp.MustCompile(`^(.*?\S)  +(-?[0-9.–]+)`).FindStringSubmatch(l)
			if m == nil {
				t.Errorf("row %q has no value column", l)
				continue
			}
			ends = append(ends, utf8.RuneCountInString(m[0]))
		}
	}
	for _, e := range ends {
		if e != ends[0] {
			t.Errorf("figure table values are not right-aligned (ends %v):\n%s", ends, r.stdout)
			break
		}
	}
}

func TestRunFormats(t *testing.T) {
	f := "testdata/scenarios/near_far_stress.yaml"
	r := ok(t, "run", f, "--slots", "1500", "--format", "csv", "--quiet")
	rows, err := csv.NewReader(strings.NewReader(r.stdout)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if strings.Join(rows[0], ",") != strings.Join(render.RunCSVHeader(false), ",") {
		t.Errorf("CSV header %v, want %v", rows[0], render.RunCSVHeader(false))
	}
	scopes := map[string]int{}
	for _, row := range rows[1:] {
		if len(row) != len(rows[0]) {
			t.Fatalf("row of %d cells, header %d", len(row), len(rows[0]))
		}
		scopes[row[0]]++
	}
	if scopes["aggregate"] != 1 || scopes["user"] != 16 || scopes["bin"] < 1 {
		t.Errorf("CSV scopes %v, want 1 aggregate, 16 users and the bins", scopes)
	}
	// --out writes the same bytes to a file.
	out := filepath.Join(t.TempDir(), "r.csv")
	ok(t, "run", f, "--slots", "1500", "--format", "csv", "--out", out, "--quiet")
	b, err := os.ReadFile(out)
	if err != nil || string(b) != r.stdout {
		t.Errorf("--out file differs from stdout (err %v)", err)
	}
	// table with --per-user lists every user.
	tr := ok(t, "run", f, "--slots", "1500", "--per-user", "--quiet")
	if !strings.Contains(tr.stdout, "per user") || !strings.Contains(tr.stdout, "cell edge") {
		t.Errorf("per-user table missing:\n%s", tr.stdout)
	}
	if r := fl(t, "run", f, "--format", "xml"); r.code != exitBadInput || !strings.Contains(r.stderr, "--format") {
		t.Errorf("--format xml: exit %d, stderr %q", r.code, r.stderr)
	}
}

// stripTimingJSON removes the wall-clock fields, the only ones that may
// differ between two runs of the same scenario and seed.
func stripTimingJSON(t *testing.T, s string) string {
	t.Helper()
	var v map[string]any
	if err := json.Unmarshal([]byte(s), &v); err != nil {
		t.Fatalf("%v\n%s", err, s)
	}
	delete(v, "wall_time_s")
	delete(v, "user_slots_per_s")
	b, _ := json.Marshal(v)
	return string(b)
}

// startServe starts "fadeloop serve" on a free loopback port and returns
// its address.
func startServe(t *testing.T, extra ...string) string {
	t.Helper()
	cmd := exec.Command(flBinary(t), append([]string{"serve", "--listen", "127.0.0.1:0", "--log-level", "info"}, extra...)...)
	cmd.Dir = repoRoot
	stderr, err := cmd.StderrPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		cmd.Process.Signal(syscall.SIGTERM)
		done := make(chan struct{})
		go func() { cmd.Wait(); close(done) }()
		select {
		case <-done:
		case <-time.After(10 * time.Second):
			cmd.Process.Kill()
		}
	})
	addrs := make(chan string, 1)
	go func() {
		sc := bufio.NewScanner(stderr)
		re := regexp.MustCompile(`grpc_addr=(\S+)`)
		for sc.Scan() {
			if m := re.FindStringSubmatch(sc.Text()); m != nil {
				addrs <- m[1]
			}
		}
		io.Copy(io.Discard, stderr)
	}()
	select {
	case a := <-addrs:
		return a
	case <-time.After(30 * time.Second):
		t.Fatal("fadeloop serve did not report its address within 30 s")
	}
	return ""
}

func TestEmbeddedAndRemoteGiveIdenticalJSON(t *testing.T) {
	addr := startServe(t)
	f := "testdata/scenarios/command_errors_delay.yaml"
	a := ok(t, "run", f, "--slots", "1500", "--format", "json", "--quiet")
	b := ok(t, "--server", addr, "run", f, "--slots", "1500", "--format", "json", "--quiet")
	if stripTimingJSON(t, a.stdout) != stripTimingJSON(t, b.stdout) {
		t.Error("embedded and remote JSON differ for the same scenario and seed")
	}
	// The same holds for a sweep (points sorted by index; summary timing aside).
	sa := ok(t, "sweep", f, "--slots", "1500", "--axis", "inner_loop.step_db=0.5,1", "--format", "csv", "--quiet")
	sb := ok(t, "sweep", f, "--slots", "1500", "--axis", "inner_loop.step_db=0.5,1", "--format", "csv", "--quiet", "--server", addr)
	if sa.stdout != sb.stdout {
		t.Errorf("embedded and remote sweep CSV differ:\n%s\n%s", sa.stdout, sb.stdout)
	}
	v := ok(t, "version", "--server", addr)
	if !strings.Contains(v.stdout, "SERVING") {
		t.Errorf("version --server: %s", v.stdout)
	}
}

func TestBadInputExitCodes(t *testing.T) {
	dir := t.TempDir()
	write := func(name, s string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(s), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	src, err := os.ReadFile(filepath.Join(repoRoot, "testdata/scenarios/near_far_stress.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	// An unknown field, caught while reading the file, with its line.
	unknown := write("unknown.yaml", strings.Replace(string(src), "  step_db: 1\n", "  step_db: 1\n  stepsize_db: 2\n", 1))
	r := fl(t, "run", unknown)
	if r.code != exitBadInput || !regexp.MustCompile(`unknown\.yaml:\d+: inner_loop\.stepsize_db: unknown field`).MatchString(r.stderr) {
		t.Errorf("unknown field: exit %d, stderr:\n%s", r.code, r.stderr)
	}
	// Values the server rejects: every violation as path: rule, at its line.
	lines := strings.Split(string(src), "\n")
	countLine, rateLine := 0, 0
	for i, l := range lines {
		if countLine == 0 && strings.TrimSpace(l) == "count: 4" {
			lines[i] = strings.Replace(l, "count: 4", "count: 0", 1)
			countLine = i + 1
		}
		if strings.TrimSpace(l) == "update_rate_hz: 1500" {
			lines[i] = strings.Replace(l, "1500", "-1", 1)
			rateLine = i + 1
		}
	}
	bad := write("bad.yaml", strings.Join(lines, "\n"))
	r = fl(t, "run", bad)
	if r.code != exitBadInput {
		t.Fatalf("server-side violations: exit %d, want 2\n%s", r.code, r.stderr)
	}
	for _, want := range []string{fmt.Sprintf("bad.yaml:%d: groups[0].count: ", countLine), fmt.Sprintf("bad.yaml:%d: inner_loop.update_rate_hz: ", rateLine)} {
		if !strings.Contains(r.stderr, want) {
			t.Errorf("stderr lacks %q:\n%s", want, r.stderr)
		}
	}
	if want := "fadeloop run: 2 problems in "; !strings.Contains(r.stderr, want) {
		t.Errorf("stderr lacks %q:\n%s", want, r.stderr)
	}
	// A run setting that a flag replaced is named as the flag's doing, not
	// the file's alone.
	good := write("good.yaml", string(src))
	r = fl(t, "run", good, "--slots", "5")
	if want := regexp.MustCompile(`good\.yaml:\d+: run\.[a-z_]+: .*\(run settings after --slots 5\)`); r.code != exitBadInput || !want.MatchString(r.stderr) {
		t.Errorf("--slots 5: exit %d, want 2 and a run.* violation naming the flag:\n%s", r.code, r.stderr)
	}
	// A bad --axis is the command line's problem, not the file's.
	r = fl(t, "sweep", good, "--axis", "inner_loop.step_db=1,2", "--axis", "inner_loop.no_such_db=1,2", "--direct")
	for _, want := range []string{"\n--axis 2: axes[1].path: ", "fadeloop sweep: 1 problem in the command line"} {
		if r.code != exitBadInput || !strings.Contains("\n"+r.stderr, want) {
			t.Errorf("bad --axis: exit %d, stderr lacks %q:\n%s", r.code, want, r.stderr)
		}
	}
	// A request field set by a flag is named with its flag as well.
	r = fl(t, "tune", good, "--axis", "inner_loop.step_db=0.5,1", "--min-reps", "1", "--max-reps", "1", "--slots", "600")
	if want := "budget.min_replications (--min-reps): "; r.code != exitBadInput || !strings.Contains(r.stderr, want) {
		t.Errorf("tune --min-reps 1: exit %d, stderr lacks %q:\n%s", r.code, want, r.stderr)
	}
	// The same in JSON.
	js := write("bad.json", `{"name": "x", "groups": [{"count": 2, "speeds": [{"speed_kmh": 3, "weight": 1}], "profil": "EPA"}]}`)
	r = fl(t, "run", js)
	if r.code != exitBadInput || !strings.Contains(r.stderr, `bad.json:1: groups[0].profil: unknown field "profil"`) {
		t.Errorf("JSON unknown field: exit %d\n%s", r.code, r.stderr)
	}
	// Flags and arguments.
	for _, args := range [][]string{
		{"run", "--slots", "x"},
		{"run", "no-such-file.yaml"},
		{"run", "a.yaml", "b.yaml"},
		{"sweep", "--axis", "inner_loop.step_db"},
		{"sweep"},
		{"nosuchcommand"},
		{"run", "--plot", "x.pdf"},
		{"run", "--plot", "heatmap=x.png"},
		{"trace", "--generator", "magic"},
	} {
		if r := fl(t, args...); r.code != exitBadInput {
			t.Errorf("fadeloop %v: exit %d, want 2\n%s", args, r.code, r.stderr)
		}
	}
}

func TestServerUnreachable(t *testing.T) {
	r := fl(t, "--server", "127.0.0.1:1", "--timeout", "20s", "run", "--slots", "1500")
	if r.code != exitUnreachable || !strings.Contains(r.stderr, "unreachable") {
		t.Errorf("exit %d, want 3\n%s", r.code, r.stderr)
	}
}

// TestInterruptCancels sends SIGINT during a long run, once its first
// progress line shows that the run is going: the CLI must stop the run,
// exit 1 and say that it was cancelled.
func TestInterruptCancels(t *testing.T) {
	cmd := exec.Command(flBinary(t), "run", "--slots", "20000000", "--replications", "1", "--progress", "lines")
	cmd.Dir = repoRoot
	stderr, err := cmd.StderrPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	var mu sync.Mutex
	var se strings.Builder
	going := make(chan struct{})
	readDone := make(chan struct{})
	go func() {
		defer close(readDone)
		sc := bufio.NewScanner(stderr)
		once := sync.Once{}
		for sc.Scan() {
			mu.Lock()
			se.WriteString(sc.Text() + "\n")
			mu.Unlock()
			if strings.HasPrefix(sc.Text(), "progress:") {
				once.Do(func() { close(going) })
			}
		}
	}()
	select {
	case <-going:
	case <-time.After(60 * time.Second):
		cmd.Process.Kill()
		t.Fatal("no progress line within 60 s")
	}
	if err := cmd.Process.Signal(syscall.SIGINT); err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { <-readDone; done <- cmd.Wait() }()
	select {
	case err := <-done:
		// Promptness is by work, not time: the 20 million slots are far
		// from done when the exit says "cancelled"; the 10 s guard below
		// only catches a hang.
		ee, isExit := err.(*exec.ExitError)
		if !isExit || ee.ExitCode() != exitFailure {
			t.Errorf("exit after SIGINT: %v, want status 1", err)
		}
		mu.Lock()
		defer mu.Unlock()
		if !strings.Contains(se.String(), "cancelled") {
			t.Errorf("stderr does not say cancelled:\n%s", se.String())
		}
	case <-time.After(10 * time.Second):
		cmd.Process.Kill()
		t.Fatal("still running 10 s after SIGINT")
	}
}
