package client

import (
	"bufio"
	"bytes"
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/tune"
	"github.com/fadeloop/fadeloop/service/jobs"
)

// TestMain lets the test binary act as a sweep submitter process that a
// test kills (see TestJobQueueSubmitterKilled).
func TestMain(m *testing.M) {
	if os.Getenv("FADELOOP_CLIENT_TEST_ROLE") == "submitter" {
		os.Exit(submitterMain())
	}
	os.Exit(m.Run())
}

// submitterMain runs the test sweep on the embedded queue in
// $FADELOOP_TEST_STORE into the CSV $FADELOOP_TEST_OUT, printing "row N"
// after each row is on disk.
func submitterMain() int {
	ctx := context.Background()
	jq, err := OpenJobQueue(ctx, JobQueueOptions{StoreDir: os.Getenv("FADELOOP_TEST_STORE"), Workers: 1})
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 1
	}
	defer jq.Close()
	spec := jobSpec()
	f, err := CreateSweepFile(os.Getenv("FADELOOP_TEST_OUT"), SweepFileCSV, spec.Axes)
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 1
	}
	n := 0
	_, err = jq.Sweep(ctx, spec, SweepJobOptions{OnResult: func(r jobs.Result) error {
		if err := f.Write(r); err != nil {
			return err
		}
		n++
		fmt.Printf("row %d\n", n)
		if n == 3 {
			time.Sleep(time.Hour) // wait here to be killed
		}
		return nil
	}})
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 1
	}
	return 0
}

// jobSpec is a tiny per-point-seeded sweep of 8 points.
func jobSpec() jobs.SweepSpec {
	sc := loop.CanonicalScenario()
	sc.Groups[0].Count = 4
	sc.Run.Slots, sc.Run.WarmupSlots = 1500, 150
	return jobs.SweepSpec{
		Base: sc,
		Axes: []tune.Axis{
			{Path: "inner_loop.step_db", First: 0.5, Last: 2, Count: 4},
			{Path: "inner_loop.update_rate_hz", Values: []float64{750, 1500}},
		},
		PerPointSeed: true,
	}
}

// runSweepToFile runs the sweep into path; stopAfter > 0 stops the
// submitter after that many rows.
func runSweepToFile(t *testing.T, store, path, format string, stopAfter int) (SweepOutcome, error) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	jq, err := OpenJobQueue(ctx, JobQueueOptions{StoreDir: store, Workers: 1, Queue: jobs.Config{AckWait: 2 * time.Second}})
	if err != nil {
		t.Fatal(err)
	}
	defer jq.Close()
	spec := jobSpec()
	f, err := CreateSweepFile(path, format, spec.Axes)
	if err != nil {
		t.Fatal(err)
	}
	rctx, stop := context.WithCancel(ctx)
	defer stop()
	rows := 0
	out, err := jq.Sweep(rctx, spec, SweepJobOptions{OnResult: func(r jobs.Result) error {
		rows++
		if rows == stopAfter {
			stop()
		}
		return f.Write(r)
	}})
	if err != nil {
		f.Close()
		return out, err
	}
	if ferr := f.Finish(); ferr != nil {
		t.Fatal(ferr)
	}
	return out, nil
}

// TestJobQueueResumeCSV: the submitter stops after 3 points (as on Ctrl-C
// or a timeout); the file holds those rows, the message says what was done
// and how to resume; the same run again reports them as done, computes only
// the rest, and the final CSV equals an uninterrupted run's byte for byte.
func TestJobQueueResumeCSV(t *testing.T) {
	dir := t.TempDir()
	whole := filepath.Join(dir, "whole.csv")
	out, err := runSweepToFile(t, filepath.Join(dir, "storeA"), whole, SweepFileCSV, 0)
	if err != nil || !out.Complete || out.Done != 8 || out.AlreadyDone != 0 {
		t.Fatalf("uninterrupted run: %+v, %v", out, err)
	}
	if msg := out.Describe(nil, whole); !strings.Contains(msg, "complete: 8 points") {
		t.Errorf("message of a finished job: %q", msg)
	}

	part := filepath.Join(dir, "part.csv")
	storeB := filepath.Join(dir, "storeB")
	out, err = runSweepToFile(t, storeB, part, SweepFileCSV, 3)
	if !errors.Is(err, context.Canceled) || out.Complete {
		t.Fatalf("interrupted run: %+v, %v; want context.Canceled", out, err)
	}
	b, _ := os.ReadFile(part)
	rows, rerr := csv.NewReader(bytes.NewReader(b)).ReadAll()
	if rerr != nil || len(rows) != 1+3 {
		t.Errorf("interrupted run left %d rows (%v), want header + 3 points:\n%s", len(rows), rerr, b)
	}
	msg := out.Describe(err, part)
	t.Logf("interrupted: %s", msg)
	for _, want := range []string{"interrupted", "3 of 8 points stored in " + part, "5 remaining", "run the same command again"} {
		if !strings.Contains(msg, want) {
			t.Errorf("message %q lacks %q", msg, want)
		}
	}
	if strings.Contains(msg, "complete") {
		t.Errorf("message of an interrupted job says complete: %q", msg)
	}

	out, err = runSweepToFile(t, storeB, part, SweepFileCSV, 0)
	if err != nil || !out.Complete {
		t.Fatalf("resumed run: %+v, %v", out, err)
	}
	if out.AlreadyDone < 3 || out.Queued != 8-out.AlreadyDone {
		t.Errorf("resumed run: %d already done, %d queued; want at least 3 done and only the rest queued", out.AlreadyDone, out.Queued)
	}
	t.Logf("resumed: %s", out.Describe(nil, part))
	a, _ := os.ReadFile(whole)
	c, _ := os.ReadFile(part)
	if !bytes.Equal(a, c) {
		t.Errorf("resumed CSV differs from the uninterrupted one:\n%s\n---\n%s", a, c)
	}
	if n := bytes.Count(c, []byte("\n")); n != 9 {
		t.Errorf("final CSV has %d lines, want 9", n)
	}
}

// TestJobQueueSubmitterKilled: a submitter process with its embedded queue
// is killed (SIGKILL) after 3 rows; its file holds those rows, and the
// same sweep run again on the store resumes and ends with the
// uninterrupted run's CSV.
func TestJobQueueSubmitterKilled(t *testing.T) {
	dir := t.TempDir()
	store, part := filepath.Join(dir, "store"), filepath.Join(dir, "part.csv")
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), "FADELOOP_CLIENT_TEST_ROLE=submitter", "FADELOOP_TEST_STORE="+store, "FADELOOP_TEST_OUT="+part)
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	cmd.Stderr = os.Stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(out)
	for sc.Scan() && sc.Text() != "row 3" {
	}
	if err := cmd.Process.Kill(); err != nil {
		t.Fatal(err)
	}
	_ = cmd.Wait()
	b, _ := os.ReadFile(part)
	if rows, err := csv.NewReader(bytes.NewReader(b)).ReadAll(); err != nil || len(rows) != 4 {
		t.Fatalf("killed submitter left %d CSV rows (%v), want header + 3:\n%s", len(rows), err, b)
	}
	res, err := runSweepToFile(t, store, part, SweepFileCSV, 0)
	if err != nil || !res.Complete || res.AlreadyDone < 3 || res.Queued != 8-res.AlreadyDone {
		t.Fatalf("re-run after the kill: %+v, %v; want at least the 3 written points done and only the rest queued", res, err)
	}
	t.Logf("re-run after the kill: %d already done, %d queued", res.AlreadyDone, res.Queued)
	whole := filepath.Join(dir, "whole.csv")
	if _, err := runSweepToFile(t, filepath.Join(dir, "storeW"), whole, SweepFileCSV, 0); err != nil {
		t.Fatal(err)
	}
	a, _ := os.ReadFile(whole)
	c, _ := os.ReadFile(part)
	if !bytes.Equal(a, c) {
		t.Errorf("CSV after kill and re-run differs from the uninterrupted one:\n%s\n---\n%s", a, c)
	}
}

// TestJobQueueJSONLAndStatus: JSON Lines output decodes to one result per
// point in grid order; Status and Cancel work by job ID.
func TestJobQueueJSONLAndStatus(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "points.jsonl")
	out, err := runSweepToFile(t, filepath.Join(dir, "store"), path, SweepFileJSONL, 0)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := os.ReadFile(path)
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	if len(lines) != 8 {
		t.Fatalf("%d lines, want 8", len(lines))
	}
	for i, l := range lines {
		r, err := jobs.DecodeResult([]byte(l))
		if err != nil || r.Index != i || r.Status != jobs.StatusDone || r.Report == nil {
			t.Errorf("line %d: index %d status %q (%v)", i, r.Index, r.Status, err)
		}
	}
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	jq, err := OpenJobQueue(ctx, JobQueueOptions{StoreDir: filepath.Join(dir, "store"), Workers: -1})
	if err != nil {
		t.Fatal(err)
	}
	defer jq.Close()
	st, err := jq.Status(ctx, out.JobID)
	if err != nil || st.Done != 8 || st.Pending != 0 {
		t.Errorf("status: %+v, %v", st, err)
	}
	if err := jq.Cancel(ctx, "no-such-job"); !errors.Is(err, jobs.ErrUnknownJob) {
		t.Errorf("cancel of an unknown job: %v", err)
	}
}

// TestSweepFileFinishOrderAndMode: Finish rewrites the rows in grid order
// and the finished file keeps the mode the file was created with (not the
// 0600 of a temporary file).
func TestSweepFileFinishOrderAndMode(t *testing.T) {
	dir := t.TempDir()
	ref := filepath.Join(dir, "ref")
	if err := os.WriteFile(ref, nil, 0o666); err != nil {
		t.Fatal(err)
	}
	want, err := os.Stat(ref)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, "p.csv")
	axes := []tune.Axis{{Path: "inner_loop.step_db", Values: []float64{1, 2, 3}}}
	f, err := CreateSweepFile(path, SweepFileCSV, axes)
	if err != nil {
		t.Fatal(err)
	}
	for _, i := range []int{2, 0, 1} {
		r := jobs.Result{Index: i, Status: jobs.StatusFailed, Error: "x",
			Point: tune.Point{Index: i, Coords: []tune.Coord{{Path: "inner_loop.step_db", Value: float64(i + 1)}}}}
		if err := f.Write(r); err != nil {
			t.Fatal(err)
		}
	}
	if err := f.Finish(); err != nil {
		t.Fatal(err)
	}
	got, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	if got.Mode().Perm() != want.Mode().Perm() {
		t.Errorf("finished file mode %v, want %v (as created)", got.Mode().Perm(), want.Mode().Perm())
	}
	b, _ := os.ReadFile(path)
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	if len(lines) != 4 || !strings.HasPrefix(lines[1], "0,") || !strings.HasPrefix(lines[2], "1,") || !strings.HasPrefix(lines[3], "2,") {
		t.Errorf("finished file not in grid order:\n%s", b)
	}
}

// TestSweepCSVRowNoInterval: a figure whose interval is not available (NaN
// bounds: one replication of a layout too short for one) keeps its value
// and leaves both bound cells empty, never "NaN".
func TestSweepCSVRowNoInterval(t *testing.T) {
	rep := &loop.Report{}
	rep.Aggregate.OutageProbability = loop.Estimate{Value: 0.125, CILow: math.NaN(), CIHigh: math.NaN()}
	rep.Aggregate.NoiseRiseMeanDB = loop.Estimate{Value: 1.5, CILow: 1.25, CIHigh: 1.75}
	r := jobs.Result{Index: 3, Seed: 9, Status: jobs.StatusDone, Report: rep}
	head, row := SweepCSVHeader(nil), SweepCSVRow(r)
	if len(head) != len(row) {
		t.Fatalf("header has %d columns, row %d", len(head), len(row))
	}
	cell := map[string]string{}
	for i, h := range head {
		cell[h] = row[i]
	}
	want := map[string]string{
		"outage_probability": "0.125", "outage_probability_ci_low": "", "outage_probability_ci_high": "",
		"noise_rise_mean_db": "1.5", "noise_rise_mean_db_ci_low": "1.25", "noise_rise_mean_db_ci_high": "1.75",
	}
	for k, v := range want {
		if cell[k] != v {
			t.Errorf("%s = %q, want %q", k, cell[k], v)
		}
	}
}

// TestSweepCSVRowLayoutNotComputed: a layout point's row leaves feasible
// and convergence_time_s empty (the multi-cell engine computes neither; 0
// and true would read as measured), while a single-cell point keeps them.
func TestSweepCSVRowLayoutNotComputed(t *testing.T) {
	for _, tc := range []struct {
		name            string
		layout          *loop.LayoutReport
		feasible, conv  string
		convLow, outage string
	}{
		{"single cell", nil, "true", "0.25", "0.2", "0.125"},
		{"layout", &loop.LayoutReport{}, "", "", "", "0.125"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rep := &loop.Report{Layout: tc.layout}
			rep.Aggregate.OutageProbability = loop.Estimate{Value: 0.125, CILow: 0.1, CIHigh: 0.15}
			rep.Aggregate.ConvergenceTimeS = loop.Estimate{Value: 0.25, CILow: 0.2, CIHigh: 0.3}
			head, row := SweepCSVHeader(nil), SweepCSVRow(jobs.Result{Status: jobs.StatusDone, Report: rep})
			cell := map[string]string{}
			for i, h := range head {
				cell[h] = row[i]
			}
			for k, want := range map[string]string{"feasible": tc.feasible, "convergence_time_s": tc.conv,
				"convergence_time_s_ci_low": tc.convLow, "outage_probability": tc.outage} {
				if cell[k] != want {
					t.Errorf("%s = %q, want %q", k, cell[k], want)
				}
			}
		})
	}
}
