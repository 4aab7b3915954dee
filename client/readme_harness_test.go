package client_test

import (
	"reflect"
	"strings"
	"testing"
)

// Tests of the README harness itself (readme_test.go): the masks, the
// elision matcher and the -update rewrite, on small invented blocks.

func TestREADMEMasks(t *testing.T) {
	for _, c := range []struct{ a, b string }{
		{"1 440 000 user-slots simulated in 0.14 s (10.15 M user-slots/s)", "1 440 000 user-slots simulated in 1.23 s (902.3 k user-slots/s)"},
		{"best: 29.96 M user-slots/s, 89.89 M path-samples/s (3 taps per user)", "best: 3.1 M user-slots/s, 9.5 M path-samples/s (3 taps per user)"},
		{"time=2026-12-01T23:01:05.542Z level=INFO msg=listening grpc_addr=127.0.0.1:8470", "time=2026-12-02T06:10:00.001Z level=INFO msg=listening grpc_addr=127.0.0.1:41234"},
		{"user-slots/s    12978566", "user-slots/s    804411"},
		{"wrote /tmp/fadeloop-1/x.png", "wrote /tmp/other/x.png"},
		{"canonical-64 — embedded server (this process), GOMAXPROCS 2", "canonical-64 — embedded server (this process), GOMAXPROCS 8"},
		{"progress: done in 0:09", "progress: done in 1:12"},
		{"  1     64   5 760 000          0.207      27.88 M         83.65 M", "  1     64   5 760 000          1.950      902.1 k         2.71 M"},
	} {
		if maskLine(c.a) != maskLine(c.b) {
			t.Errorf("masked lines differ:\n%q\n%q", maskLine(c.a), maskLine(c.b))
		}
	}
	// Figures that are not timings stay as they are.
	for _, c := range []struct{ a, b string }{
		{"1 440 000 user-slots simulated in 0.14 s", "1 440 001 user-slots simulated in 0.14 s"},
		{"outage (%)                  6.17  [6.12, 6.23]", "outage (%)                  6.18  [6.12, 6.23]"},
		{"  0            -3.21                48.1", "  0            -3.15                48.5"},
		{"  1     64   5 760 000          0.207      27.88 M         83.65 M", "  1     64   5 760 001          0.207      27.88 M         83.65 M"},
	} {
		if maskLine(c.a) == maskLine(c.b) {
			t.Errorf("masks hide a real difference: %q vs %q", c.a, c.b)
		}
	}
}

func TestREADMEMatchLines(t *testing.T) {
	act := []string{"head", "a 1", "a 2", "a 3", "tail"}
	for _, c := range []struct {
		exp  []string
		want bool
	}{
		{[]string{"head", "a 1", "a 2", "a 3", "tail"}, true},
		{[]string{"head", "...", "tail"}, true},
		{[]string{"head", "   ...", "a 3", "tail"}, true},
		{[]string{"head", " ... the middle rows ...", "tail"}, true},
		{[]string{"...", "a 2", "..."}, true},
		{[]string{"head", "...", "a 9", "...", "tail"}, false},
		{[]string{"head", "a 1", "tail"}, false},
		{[]string{"head", "a 1", "a 2", "a 3"}, false},
		{[]string{"head", "a 1", "a 2", "a 3", "tail", "more"}, false},
		{[]string{"head", "...", "a 1", "...", "a 1", "...", "tail"}, false},
	} {
		if _, got := matchLines(c.exp, act); got != c.want {
			t.Errorf("matchLines(%q) = %v, want %v", c.exp, got, c.want)
		}
	}
}

func TestREADMEUpdatedLines(t *testing.T) {
	act := []string{"title", "in 0.20 s", "", "per user:", "0  x  1.25", "1  x  1.50", "2  x  1.75", "done"}
	for _, c := range []struct {
		name string
		exp  []string
		want []string
	}{
		{"no elision: the whole output",
			[]string{"old"}, act},
		{"matching: the README's timings and elisions kept",
			[]string{"title", "in 0.14 s", "...", "done"},
			[]string{"title", "in 0.14 s", "...", "done"}},
		{"changed: a line differing only in timings keeps the README's",
			[]string{"title", "in 0.14 s", "", "old"},
			[]string{"title", "in 0.14 s", "", "per user:", "0  x  1.25", "1  x  1.50", "2  x  1.75", "done"}},
		{"changed: head and tail from the output, the middle placed by its first line",
			[]string{"title", "...", "per user:", "0  x  9.99", "   ...", "done"},
			[]string{"title", "...", "per user:", "0  x  1.25", "   ...", "done"}},
	} {
		got, err := updatedLines(c.exp, act)
		if err != nil {
			t.Errorf("%s: %v", c.name, err)
			continue
		}
		if !reflect.DeepEqual(got, c.want) {
			t.Errorf("%s:\n got %q\nwant %q", c.name, got, c.want)
		}
	}
	*updateTimings = true
	got, _ := updatedLines([]string{"title", "in 0.14 s", "...", "done"}, act)
	*updateTimings = false
	if want := []string{"title", "in 0.20 s", "...", "done"}; !reflect.DeepEqual(got, want) {
		t.Errorf("-update-timings: got %q, want %q", got, want)
	}
	if _, err := updatedLines([]string{"title", "...", "no such line", "...", "done"}, act); err == nil {
		t.Error("an unplaceable segment was accepted")
	}
}

func TestREADMEParse(t *testing.T) {
	readme := strings.Split(strings.Join([]string{
		"text",
		"```",
		"$ not checked",
		"```",
		"<!-- check: run -->",
		"```",
		"$ fadeloop check",
		"line 1",
		"...",
		"$ echo hi",
		"hi",
		"```",
		"<!-- check: run-with-server; skip unless: true -->",
		"```sh",
		"$ fadeloop serve --listen 127.0.0.1:8470",
		"```",
	}, "\n"), "\n")
	blocks, err := parseREADME(readme)
	if err != nil {
		t.Fatal(err)
	}
	if len(blocks) != 2 {
		t.Fatalf("%d blocks, want 2", len(blocks))
	}
	b := blocks[0]
	if b.withServer || len(b.steps) != 2 || b.steps[0].cmd != "fadeloop check" ||
		!reflect.DeepEqual(b.steps[0].expected, []string{"line 1", "..."}) || b.steps[1].cmdLine != 9 {
		t.Errorf("block 0 parsed as %+v", b)
	}
	if !blocks[1].withServer || blocks[1].skipUnless != "true" {
		t.Errorf("block 1 parsed as %+v", blocks[1])
	}
	for _, bad := range [][]string{
		{"<!-- check: run -->", "text"},
		{"<!-- check: run -->", "```", "output first", "```"},
		{"<!-- check: run -->", "```", "$ x"},
		{"<!-- check: walk -->", "```", "$ x", "```"},
	} {
		if _, err := parseREADME(bad); err == nil {
			t.Errorf("parseREADME(%q) accepted", bad)
		}
	}
	if got := rewriteCommand("go run ./client/cmd/fadeloop --server 127.0.0.1:8470 run", "127.0.0.1:5"); got != "fadeloop --server 127.0.0.1:5 run" {
		t.Errorf("rewriteCommand = %q", got)
	}
}
