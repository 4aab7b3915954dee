package client

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/tune"
	"github.com/fadeloop/fadeloop/service/jobs"
)

// jobSpec is a tiny per-point-seeded sweep of 8 points.
func jobSpec() jobs.SweepSpec {
	sc := loop.CanonicalScenario()
	sc.Groups[0].Count = 4
	sc.Run.Slots, sc.Run.WarmupSlots = 1500, 150
	return jobs.SweepSpec{
		Base: sc,
		Axes: []tune.Axis{
			{Path: "inner_loop.step_db", From: 0.5, To: 2, Count: 4},
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
	a, _ := os.ReadFile(whole)
	c, _ := os.ReadFile(part)
	if !bytes.Equal(a, c) {
		t.Errorf("resumed CSV differs from the uninterrupted one:\n%s\n---\n%s", a, c)
	}
	if n := bytes.Count(c, []byte("\n")); n != 9 {
		t.Errorf("final CSV has %d lines, want 9", n)
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
		var r jobs.Result
		if err := json.Unmarshal([]byte(l), &r); err != nil || r.Index != i || r.Status != jobs.StatusDone || r.Report == nil {
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
