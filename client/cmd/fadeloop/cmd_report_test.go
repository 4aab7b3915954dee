package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestReportCommand runs a scenario to JSON, then writes its report, and
// checks the page carries the run's seed and the caution; a file that is
// not a result is bad input (exit 2).
func TestReportCommand(t *testing.T) {
	dir := t.TempDir()
	res, page := filepath.Join(dir, "result.json"), filepath.Join(dir, "report.html")
	ok(t, "run", "testdata/scenarios/small.json", "--slots", "1500", "--format", "json", "--out", res, "--quiet")
	ok(t, "report", res, "--out", page, "--quiet")
	b, err := os.ReadFile(page)
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	// small.json: run.seed 7 (testdata/scenarios/small.json).
	for _, want := range []string{"<!DOCTYPE html>", "small-4-users", "<td>7</td>", "Caution.", "<svg"} {
		if !strings.Contains(s, want) {
			t.Errorf("report lacks %q", want)
		}
	}
	if strings.Contains(s, "<script") {
		t.Error("report has a script")
	}
	fl(t, "report", "testdata/scenarios/small.json", "--out", filepath.Join(dir, "x.html")).want(t, 2, "report", "scenario file")
	if _, err := os.Stat(filepath.Join(dir, "x.html")); err == nil {
		t.Error("a failed report left its output file")
	}
}
