package main

import (
	"bytes"
	"encoding/csv"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"
)

// csvDataRows returns the number of complete data rows (header excluded) in
// a sweep CSV, 0 while the file does not exist yet.
func csvDataRows(t *testing.T, path string) int {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		return 0
	}
	// Only complete lines count: a row is flushed whole, but a read may
	// race the write.
	if i := bytes.LastIndexByte(b, '\n'); i >= 0 {
		b = b[:i+1]
	} else {
		return 0
	}
	rows, err := csv.NewReader(bytes.NewReader(b)).ReadAll()
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return max(len(rows)-1, 0)
}

// jobLine is the first line of a queued sweep: job ID, where it is
// stored, points already stored, points in all, points to run.
var jobLine = regexp.MustCompile(`job ([0-9a-f]{32}) \((?:store|queue) ([^)]*)\): (\d+) of (\d+) points already stored, (\d+) to run`)

// TestSweepQueueInterruptResume interrupts a queued sweep (SIGINT, as
// Ctrl-C) once some rows are on disk, checks that they stay there and the
// closing line says what was done and how to resume, then re-runs the same
// command: it reports the stored points, computes only the rest, and the
// finished CSV equals that of an uninterrupted run on a fresh store (the
// results are deterministic in the request seed, source: DESIGN.md
// "Determinism"). Bounded by work: the interrupt is sent after rows are
// seen, not after a time.
func TestSweepQueueInterruptResume(t *testing.T) {
	dir := t.TempDir()
	const points = 8
	args := func(store, out string) []string {
		return []string{"sweep", "testdata/scenarios/canonical.json", "--slots", "1500",
			"--axis", "inner_loop.step_db=0.25:2:" + strconv.Itoa(points), "--seed-mode", "per-point",
			"--queue", "local", "--store", store, "--workers", "1", "--out", out, "--progress", "none"}
	}
	store, part := filepath.Join(dir, "store"), filepath.Join(dir, "part.csv")

	cmd := exec.Command(flBinary(t), args(store, part)...)
	cmd.Dir = repoRoot
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	exited := make(chan error, 1)
	go func() { exited <- cmd.Wait() }()
	var werr error
	interrupted := false
wait:
	for {
		select {
		case werr = <-exited:
			break wait
		case <-time.After(20 * time.Millisecond):
			if !interrupted && csvDataRows(t, part) >= 2 {
				cmd.Process.Signal(os.Interrupt)
				interrupted = true
			}
		}
	}
	if !interrupted {
		t.Fatalf("the sweep ended before 2 rows were seen (%v):\n%s", werr, stderr.String())
	}
	stored := csvDataRows(t, part)
	if cmd.ProcessState.ExitCode() == 0 || stored == points {
		// One worker computes one point at a time: 8 points cannot all be
		// stored in the time a signal takes to arrive unless the run is
		// very fast; then there is nothing to resume.
		t.Skipf("all %d points finished before the interrupt arrived (exit %d)", stored, cmd.ProcessState.ExitCode())
	}
	msg := stderr.String()
	if !strings.Contains(msg, "interrupted") || !strings.Contains(msg, "run the same command again to resume") || strings.Contains(msg, " complete:") || strings.Contains(msg, "done") {
		t.Errorf("interrupted run's closing line:\n%s", msg)
	}
	if m := regexp.MustCompile(`(\d+) of 8 points stored in .*part\.csv and the job store .*, (\d+) remaining`).FindStringSubmatch(msg); m == nil {
		t.Errorf("no \"N of 8 points stored …, M remaining\" in:\n%s", msg)
	} else if n, _ := strconv.Atoi(m[1]); n != stored {
		// Every point reported stored is in the file.
		t.Errorf("closing line says %d stored, the file has %d rows", n, stored)
	}
	sub := jobLine.FindStringSubmatch(msg)
	if sub == nil {
		t.Fatalf("no job line in:\n%s", msg)
	}
	id := sub[1]

	// --status sees the stored points; the job is not complete.
	st := ok(t, "sweep", "--status", id, "--store", store)
	m := regexp.MustCompile(`job ` + id + `: (\w+), 8 points: (\d+) done, 0 failed, (\d+) pending`).FindStringSubmatch(st.stdout)
	if m == nil || m[1] == "complete" {
		t.Fatalf("status after interrupt: %q", st.stdout)
	}
	if done, _ := strconv.Atoi(m[2]); done < stored {
		t.Errorf("status: %d done, the file had %d rows", done, stored)
	}

	// Resume: the stored points are reported and not queued again.
	r := ok(t, args(store, part)...)
	sub = jobLine.FindStringSubmatch(r.stderr)
	if sub == nil || sub[1] != id {
		t.Fatalf("resume job line (want job %s):\n%s", id, r.stderr)
	}
	already, _ := strconv.Atoi(sub[3])
	queued, _ := strconv.Atoi(sub[5])
	if already < stored || already+queued != points || sub[4] != strconv.Itoa(points) {
		t.Errorf("resume: %d already stored + %d to run of %s, want ≥ %d stored and %d in all", already, queued, sub[4], stored, points)
	}
	if want := filepath.Join(store, id); sub[2] != want {
		t.Errorf("resume line names the store %q, want %q", sub[2], want)
	}
	want := "complete: 8 points (" + sub[3] + " stored earlier, " + strconv.Itoa(points-already) + " computed now)"
	if !strings.Contains(r.stderr, want) {
		t.Errorf("resume closing line: want %q in\n%s", want, r.stderr)
	}
	if st := ok(t, "sweep", "--status", id, "--store", store); !strings.Contains(st.stdout, "complete, 8 points: 8 done, 0 failed, 0 pending") {
		t.Errorf("status after resume: %q", st.stdout)
	}

	// The resumed file equals an uninterrupted run's on a fresh store.
	whole := filepath.Join(dir, "whole.csv")
	ok(t, args(filepath.Join(dir, "store2"), whole)...)
	a, _ := os.ReadFile(part)
	b, _ := os.ReadFile(whole)
	if len(a) == 0 || !bytes.Equal(a, b) {
		t.Errorf("resumed CSV differs from an uninterrupted run's:\n%s\n---\n%s", a, b)
	}
	if n := csvDataRows(t, whole); n != points {
		t.Errorf("uninterrupted CSV: %d rows, want %d", n, points)
	}
}

// TestSweepQueueCancel: --cancel on a job drops its queued points (the ones
// stored stay); --status then says cancelled; re-running the command
// resumes and completes it.
func TestSweepQueueCancel(t *testing.T) {
	dir := t.TempDir()
	store, out := filepath.Join(dir, "store"), filepath.Join(dir, "p.csv")
	args := []string{"sweep", "--slots", "1000", "--axis", "inner_loop.step_db=0.5,1",
		"--queue", "local", "--store", store, "--workers", "1", "--out", out, "--progress", "none"}
	first := ok(t, args...)
	sub := jobLine.FindStringSubmatch(first.stderr)
	if sub == nil {
		t.Fatalf("no job line:\n%s", first.stderr)
	}
	id := sub[1]
	c := ok(t, "sweep", "--cancel", id, "--store", store)
	if !strings.Contains(c.stdout, "job "+id+": cancelled, 2 points: 2 done, 0 failed, 0 pending") {
		t.Errorf("cancel output: %q", c.stdout)
	}
	if s := ok(t, "sweep", "--status", id, "--store", store); !strings.Contains(s.stdout, ": cancelled,") {
		t.Errorf("status after cancel: %q", s.stdout)
	}
	again := ok(t, args...)
	if !strings.Contains(again.stderr, "2 of 2 points already stored, 0 to run") || !strings.Contains(again.stderr, "complete: 2 points (2 stored earlier, 0 computed now)") {
		t.Errorf("re-run after cancel:\n%s", again.stderr)
	}
	// An unknown job is bad input (exit 2), naming the job.
	r := fl(t, "sweep", "--status", "0123456789abcdef0123456789abcdef", "--store", store)
	r.want(t, 2)
	if !strings.Contains(r.stderr, "no job 0123456789abcdef0123456789abcdef") {
		t.Errorf("unknown job: %q", r.stderr)
	}
}

// TestSweepQueueFlags: an unreachable --queue exits 3 (the CLI's exit status
// for an unreachable server); malformed or conflicting queue flags exit 2
// naming the flag.
func TestSweepQueueFlags(t *testing.T) {
	dir := t.TempDir()
	out := filepath.Join(dir, "x.csv")
	r := fl(t, "sweep", "--axis", "inner_loop.step_db=1,2", "--queue", "nats://127.0.0.1:1", "--out", out)
	r.want(t, 3)
	if !strings.Contains(r.stderr, "unreachable") {
		t.Errorf("unreachable queue: %q", r.stderr)
	}
	// A value outside the field's range is bad input naming the field, as
	// on the direct path; nothing is queued.
	r = fl(t, "sweep", "--axis", "inner_loop.step_db=-1,2", "--queue", "local", "--store", filepath.Join(dir, "s"), "--out", out)
	r.want(t, 2)
	if !strings.Contains(r.stderr, "inner_loop.step_db") || !strings.Contains(r.stderr, "(0, 10] dB") || strings.Contains(r.stderr, "queued") {
		t.Errorf("invalid axis value on the queue path: %q", r.stderr)
	}
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--queue", "http://x:1", "--out", out}, "--queue"},
		{[]string{"--queue", "local", "--server", "127.0.0.1:1", "--out", out}, "--server"},
		{[]string{"--queue", "local", "--store", dir, "--out", out, "--workers", "-1"}, "--workers"},
		{[]string{"--out", out, "--report", filepath.Join(dir, "r.txt")}, "--report"},
		{[]string{"--direct", "--queue", "local"}, "--direct"},
		{[]string{"--direct", "--workers", "2"}, "--direct"},
		{[]string{"--format", "jsonl"}, "--out"},
		{[]string{"--direct", "--format", "jsonl"}, "--format"},
	} {
		r := fl(t, append([]string{"sweep", "--axis", "inner_loop.step_db=1,2"}, c.args...)...)
		r.want(t, 2, c.args...)
		if !strings.Contains(r.stderr, c.want) {
			t.Errorf("%v: stderr %q does not name %s", c.args, r.stderr, c.want)
		}
	}
}

// TestSweepReport: --report writes an HTML report of the sweep on both
// paths (direct and queued).
func TestSweepReport(t *testing.T) {
	dir := t.TempDir()
	for _, extra := range [][]string{nil, {"--queue", "local", "--store", filepath.Join(dir, "store"), "--workers", "1", "--out", filepath.Join(dir, "q.csv")}} {
		rep := filepath.Join(dir, "r.html")
		os.Remove(rep)
		ok(t, append([]string{"sweep", "--slots", "1000", "--axis", "inner_loop.step_db=0.5,1", "--quiet", "--report", rep}, extra...)...)
		b, err := os.ReadFile(rep)
		if err != nil {
			t.Fatal(err)
		}
		s := string(b)
		if !strings.Contains(s, "<html") || !strings.Contains(s, "inner_loop.step_db") {
			t.Errorf("%v: report is not an HTML sweep report (%d bytes)", extra, len(b))
		}
	}
}

// TestSweepDefaultMatchesDirect: with no --server the sweep runs on the
// embedded job queue and shows exactly what the in-process direct path
// (--direct) shows: the same CSV bytes (single- and multi-cell) and the
// same table but for the timing line; its first line names the job store
// (under FADELOOP_STORE in the tests, never the user cache). Run again, it
// finds every point stored and prints the same output.
func TestSweepDefaultMatchesDirect(t *testing.T) {
	for _, c := range []struct {
		name string
		args []string
	}{
		{"single-cell", []string{"sweep", "testdata/scenarios/command_errors_delay.yaml", "--slots", "1500", "--progress", "none",
			"--axis", "inner_loop.step_db=0.5,1,2", "--axis", "groups[0].speeds[0].speed_kmh=3,60", "--seed-mode", "per-point"}},
		{"multi-cell", []string{"sweep", "testdata/scenarios/harbour_town.json", "--slots", "600", "--replications", "1", "--progress", "none",
			"--axis", "layout.handover.window_db=0,6"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			csvArgs := append(append([]string(nil), c.args...), "--format", "csv")
			q := ok(t, csvArgs...)
			d := ok(t, append(csvArgs, "--direct")...)
			if q.stdout != d.stdout || !strings.Contains(q.stdout, "\n") {
				t.Errorf("queued and direct CSV differ:\n%s\n---\n%s", q.stdout, d.stdout)
			}
			if d.stderr != "" {
				t.Errorf("--direct with --progress none wrote to stderr: %q", d.stderr)
			}
			sub := jobLine.FindStringSubmatch(q.stderr)
			if sub == nil || !strings.HasPrefix(q.stderr, sub[0]) {
				t.Fatalf("the queued run's first line is not the job line:\n%s", q.stderr)
			}
			if want := filepath.Join(testStore, sub[1]); sub[2] != want || sub[3] != "0" || sub[5] != sub[4] {
				t.Errorf("first run: store %q (want %q), %s of %s stored, %s to run", sub[2], want, sub[3], sub[4], sub[5])
			}
			// Again: everything stored, nothing computed, the same CSV.
			again := ok(t, csvArgs...)
			if again.stdout != q.stdout {
				t.Errorf("resumed CSV differs:\n%s\n---\n%s", again.stdout, q.stdout)
			}
			if !strings.Contains(again.stderr, sub[4]+" of "+sub[4]+" points already stored, 0 to run") {
				t.Errorf("second run's job line:\n%s", again.stderr)
			}
			// --quiet keeps only what matters: a resumed run says so.
			if qr := ok(t, append(csvArgs, "--quiet")...); !strings.HasPrefix(qr.stderr, "job "+sub[1]+" (store ") ||
				!strings.HasSuffix(qr.stderr, " points already stored, 0 to run\n") || strings.Count(qr.stderr, "\n") != 1 {
				t.Errorf("--quiet resumed run's stderr: %q", qr.stderr)
			}
			// The table: identical but for line 2 (count, user-slots, time).
			tq := strings.Split(ok(t, c.args...).stdout, "\n")
			td := strings.Split(ok(t, append(c.args, "--direct")...).stdout, "\n")
			if len(tq) < 4 || len(tq) != len(td) {
				t.Fatalf("tables: %d and %d lines", len(tq), len(td))
			}
			for i := range tq {
				if i != 1 && tq[i] != td[i] {
					t.Errorf("table line %d differs:\n%s\n%s", i, tq[i], td[i])
				}
			}
		})
	}
}

// TestTuneDefaultResumes: tune with no --server runs its replications on
// the embedded job queue: the same CSV as the in-process search (--direct);
// run again it finds the replications stored (its first line says where
// and how many) and gives the same answer. (The interrupted case is checked in
// service/jobs TestTuneThroughQueueResumes.)
func TestTuneDefaultResumes(t *testing.T) {
	args := []string{"tune", "--slots", "1500", "--axis", "inner_loop.step_db=0.5,1,2", "--speeds", "3,60",
		"--max-reps", "4", "--format", "csv", "--progress", "none"}
	q := ok(t, args...)
	d := ok(t, append(args, "--direct")...)
	if q.stdout != d.stdout || q.stdout == "" {
		t.Errorf("queued and direct tune CSV differ:\n%s\n---\n%s", q.stdout, d.stdout)
	}
	if q.stderr != "" {
		t.Errorf("a first search printed on stderr (only a resumed one names its job): %q", q.stderr)
	}
	line := regexp.MustCompile(`^tune job ([0-9a-f]{32}) \(store ([^)]*)\): (\d+) replications already stored\n`)
	again := ok(t, args...)
	m := line.FindStringSubmatch(again.stderr)
	if m == nil || m[3] == "0" || m[2] != filepath.Join(testStore, m[1]) {
		t.Errorf("second run's first line: %q", again.stderr)
	}
	if again.stdout != q.stdout {
		t.Errorf("resumed tune CSV differs:\n%s\n---\n%s", again.stdout, q.stdout)
	}
}

// TestNoStoreFallsBack: with no user cache directory (no HOME, no
// XDG_CACHE_HOME, no FADELOOP_STORE) the default sweep and tune still run,
// in process without the queue, and say so; a store named explicitly that
// cannot be created is an error (exit 1) instead.
func TestNoStoreFallsBack(t *testing.T) {
	var env []string
	for _, kv := range os.Environ() {
		if k, _, _ := strings.Cut(kv, "="); k != "HOME" && k != "XDG_CACHE_HOME" && k != "FADELOOP_STORE" {
			env = append(env, kv)
		}
	}
	run := func(env []string, args ...string) (int, string, string) {
		cmd := exec.Command(flBinary(t), args...)
		cmd.Dir, cmd.Env = repoRoot, env
		var so, se bytes.Buffer
		cmd.Stdout, cmd.Stderr = &so, &se
		err := cmd.Run()
		if ee, ok := err.(*exec.ExitError); ok {
			return ee.ExitCode(), so.String(), se.String()
		} else if err != nil {
			t.Fatal(err)
		}
		return 0, so.String(), se.String()
	}
	sweep := []string{"sweep", "--slots", "1000", "--axis", "inner_loop.step_db=0.5,1", "--format", "csv", "--progress", "none"}
	code, out, errOut := run(env, sweep...)
	if code != 0 || !strings.Contains(errOut, "no job store") || !strings.Contains(errOut, "without the job queue") {
		t.Errorf("sweep without a cache directory: exit %d\n%s", code, errOut)
	}
	if want := ok(t, append(sweep, "--direct")...).stdout; out != want {
		t.Errorf("fallback sweep CSV differs from --direct:\n%s\n---\n%s", out, want)
	}
	code, out, errOut = run(env, "tune", "--slots", "1000", "--axis", "inner_loop.step_db=0.5,1", "--max-reps", "2", "--format", "csv", "--progress", "none")
	if code != 0 || !strings.Contains(errOut, "no job store") || !strings.HasPrefix(out, "scope,") {
		t.Errorf("tune without a cache directory: exit %d\n%s\n%s", code, out, errOut)
	}
	bad := filepath.Join(t.TempDir(), "file")
	if err := os.WriteFile(bad, nil, 0o600); err != nil {
		t.Fatal(err)
	}
	code, _, errOut = run(append(env, "FADELOOP_STORE="+filepath.Join(bad, "sub")), sweep...)
	if code != 1 || strings.Contains(errOut, "without the job queue") {
		t.Errorf("unusable --store: exit %d, want 1 and no fallback\n%s", code, errOut)
	}
}
