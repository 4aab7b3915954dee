package main

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/fadeloop/fadeloop/fading"
)

// runIn runs the program in this process and returns exit status and
// output.
func runIn(args ...string) (int, string, string) {
	var so, se bytes.Buffer
	code := run(context.Background(), args, &so, &se)
	return code, so.String(), se.String()
}

// TestEnvironmentFlags: FADELOOP_<FLAG> sets a flag, the command line wins,
// and a bad value is bad input naming the variable.
func TestEnvironmentFlags(t *testing.T) {
	if got := envName("tls-server-name"); got != "FADELOOP_TLS_SERVER_NAME" {
		t.Errorf("envName = %q", got)
	}
	t.Setenv("FADELOOP_FORMAT", "json")
	code, out, se := runIn("example")
	var v map[string]any
	if code != exitOK || json.Unmarshal([]byte(out), &v) != nil {
		t.Fatalf("FADELOOP_FORMAT=json example: exit %d, not JSON\n%s%s", code, out, se)
	}
	code, out, _ = runIn("example", "--format", "yaml")
	if code != exitOK || json.Unmarshal([]byte(out), &v) == nil || !strings.Contains(out, "# ") {
		t.Errorf("--format yaml did not win over FADELOOP_FORMAT (exit %d)", code)
	}
	t.Setenv("FADELOOP_QUIET", "perhaps")
	code, _, se = runIn("example")
	if code != exitBadInput || !strings.Contains(se, "FADELOOP_QUIET") {
		t.Errorf("bad FADELOOP_QUIET: exit %d\n%s", code, se)
	}
}

// TestCompletionManVersion: shell completion scripts, man pages and
// --version; no command and an unknown command are bad input.
func TestCompletionManVersion(t *testing.T) {
	for shell, want := range map[string]string{"bash": "complete -o default -F __start_fadeloop fadeloop",
		"zsh": "#compdef fadeloop", "fish": "complete -c fadeloop"} {
		code, out, se := runIn("completion", shell)
		if code != exitOK || !strings.Contains(out, want) {
			t.Errorf("completion %s: exit %d, lacks %q\n%s", shell, code, want, se)
		}
	}
	dir := filepath.Join(t.TempDir(), "man1")
	if code, _, se := runIn("man", dir); code != exitOK {
		t.Fatalf("man: exit %d\n%s", code, se)
	}
	for _, c := range append(sortedCommands(), &command{name: "completion"}) {
		b, err := os.ReadFile(filepath.Join(dir, "fadeloop-"+c.name+".1"))
		if err != nil || !bytes.Contains(b, []byte(".TH \"FADELOOP\" \"1\"")) {
			t.Errorf("man page of %s: %v", c.name, err)
		}
	}
	// Single-dash long flags, as the earlier parser read them.
	if code, out, se := runIn("-format=json", "example", "-out", "-"); code != exitOK || !strings.HasPrefix(strings.TrimSpace(out), "{") {
		t.Errorf("-format=json example -out -: exit %d\n%s%s", code, out, se)
	}
	if code, out, _ := runIn("--version"); code != exitOK || !strings.HasPrefix(out, "fadeloop ") {
		t.Errorf("--version: exit %d, %q", code, out)
	}
	if code, _, se := runIn(); code != exitBadInput || !strings.Contains(se, "Usage: fadeloop") {
		t.Errorf("no command: exit %d\n%s", code, se)
	}
	if code, _, se := runIn("--format", "csv", "nosuch"); code != exitBadInput || !strings.Contains(se, `unknown command "nosuch"`) {
		t.Errorf("unknown command: exit %d\n%s", code, se)
	}
}

// TestInfoCommand: the info table lists every built-in profile of package
// fading with its tap count (EPA: 7 taps, TS 36.101 Annex B.2 (memory)).
func TestInfoCommand(t *testing.T) {
	code, out, se := runIn("info")
	if code != exitOK {
		t.Fatalf("info: exit %d\n%s", code, se)
	}
	for _, name := range fading.BuiltinProfileNames() {
		p, _ := fading.BuiltinProfile(name)
		if !regexp.MustCompile(`(?m)^` + name + ` +` + strconv.Itoa(len(p.Taps)) + ` `).MatchString(out) {
			t.Errorf("info lacks %s with %d taps:\n%s", name, len(p.Taps), out)
		}
	}
	if !strings.Contains(out, "multi-cell engine fadeloop-multicell/") {
		t.Errorf("info does not name the multi-cell engine:\n%s", out)
	}
	if !strings.Contains(out, "traced users per run") || !regexp.MustCompile(`(?m)^EPA +7 `).MatchString(out) {
		t.Errorf("info table:\n%s", out)
	}
	if code, _, _ := runIn("info", "extra"); code != exitBadInput {
		t.Errorf("info extra: exit %d, want 2", code)
	}
}
