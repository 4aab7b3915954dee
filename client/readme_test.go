package client_test

// The README stays true: TestREADME runs the README's marked command blocks
// with the real binaries and compares what they print with what the README
// shows, so a change in output fails the tests until the README is updated.
// `go test ./client -run README -args -update` rewrites the output lines of
// every marked block from a real run.
//
// It lives in package client_test because the blocks exercise the client's
// command-line tool end to end (the CLI is a thin layer over this package),
// and client/ is the package that owns the user-facing behaviour.
//
// # Convention
//
// A block is checked only when the line directly above its opening fence is
// one of these HTML comments (invisible when the README is rendered):
//
//	<!-- check: run -->               run the block's commands
//	<!-- check: run-with-server -->   the same, with a live server (below)
//
// An optional "; skip unless: SHELL-COMMAND" before the closing "-->" skips
// the block (with the reason logged) when SHELL-COMMAND exits non-zero, for
// blocks that need a tool outside Go (e.g. Debian's python3-numpy).
//
// Inside the fence, a line starting with "$ " is a command and the lines up
// to the next command are its expected output (standard output and standard
// error, interleaved as written). A line that is "..." alone (any
// indentation), or starts with "... " and ends with " ...", elides any
// number of lines. Every command runs with `sh -c` in a fresh temporary
// directory per block (shared by the block's commands) that holds symlinks
// to the repository's testdata/, proto/ and client/, with PATH starting
// with freshly built fadeloop and fadeloopd; `go run ./client/cmd/fadeloop`
// is rewritten to the built fadeloop, and a command's exit status is not
// checked (write `; echo "exit $?"` to show it).
//
// Lines are compared after the masks in readmeMasks replace timings and
// throughput (wall times, "in 0.14 s", "M user-slots/s", timestamps, temp
// directories, loopback ports) on both sides; progress lines ("progress:
// ..." from the CLI, "progress 52.1% ..." from the Python example: their
// count depends on speed) are dropped from the output. Everything else must match exactly.
//
// # Blocks with a server
//
// In a run-with-server block every "127.0.0.1:NNNN" (or "127.0.0.1:PORT")
// in a command is replaced by a free loopback port picked at run time. When
// the block's first command is `fadeloop serve ...` or `fadeloopd ...`, that
// command is started in the background (with the port substituted) and its
// expected lines are compared with the first lines it prints by the time it
// accepts connections; otherwise the harness starts `fadeloopd -listen
// 127.0.0.1:PORT -metrics-listen ""` itself, before the first command. The
// server gets SIGTERM when the block ends. In the output, the live address
// is written back as the README's (the block's first loopback address), so
// that -update keeps "127.0.0.1:8470" where the README has it.
//
// # -update
//
// With -update, each marked block's output lines are replaced by the real
// run's, keeping the README's elisions. A step whose output already matches
// (under the masks) is left as it is, so that timings measured on a quiet
// machine are not replaced by a busy machine's; -update-timings rewrites
// those too. Line by line likewise: where the output changed, a line that
// differs from the README's only in masked timings keeps the README's
// text. Around elisions, the lines before the first "..."
// are the first lines of the real output, the lines after the last are its
// last lines, and a segment between two elisions is placed where its first
// line (numbers aside) reappears in the output. Only output lines inside
// marked blocks change.

import (
	"bytes"
	"context"
	"flag"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"
)

var (
	updateREADME  = flag.Bool("update", false, "rewrite the README's marked output blocks from real runs")
	updateTimings = flag.Bool("update-timings", false, "with -update, also rewrite lines that differ only in masked timings")
)

// readmeMasks are applied, in order, to every expected and every actual
// line before they are compared: each replaces a timing or throughput
// figure, a date, a loopback port or a temporary path by a fixed token.
var readmeMasks = []struct {
	re   *regexp.Regexp
	repl string
}{
	// "in 0.14 s", "in 1.33 s", "done in 0:09".
	{regexp.MustCompile(`\bin [0-9][0-9.:]* s\b`), "in <T> s"},
	{regexp.MustCompile(`\bin [0-9]+:[0-9]{2}\b`), "in <T>"},
	// Rates: "10.15 M user-slots/s", "902.3 k user-slots/s",
	// "89.89 M path-samples/s", "50 M complex samples/s".
	{regexp.MustCompile(`[0-9][0-9.]*(?: [0-9]{3})*(?: [kMG])? (user-slots|path-samples|complex samples|samples|slot round trips)/s`), "<R> $1/s"},
	// A rate as a bare number after its name ("user-slots/s    12978566").
	{regexp.MustCompile(`(user-slots/s|samples/s) +[0-9][0-9.]*$`), "$1 <R>"},
	// Timestamps: "time=2026-12-01T23:01:05.542Z", "2026-12-01 23:01:05".
	{regexp.MustCompile(`[0-9]{4}-[0-9]{2}-[0-9]{2}[T ][0-9]{2}:[0-9]{2}:[0-9]{2}(?:\.[0-9]+)?(?:Z|[+-][0-9]{2}:?[0-9]{2})?`), "<DATE>"},
	// Loopback addresses carry the port picked at run time.
	{regexp.MustCompile(`127\.0\.0\.1:(?:[0-9]+|PORT)`), "127.0.0.1:<PORT>"},
	// Temporary directories.
	{regexp.MustCompile(`/tmp/[^\s:'"]*`), "<TMP>"},
	// A bench row's wall time and two rates ("0.207      27.88 M         83.65 M").
	{regexp.MustCompile(`[0-9]+\.[0-9]+ +[0-9.]+ [kMG] +[0-9.]+ [kMG]$`), "<T> <R> <R>"},
	// The core count of the machine.
	{regexp.MustCompile(`GOMAXPROCS [0-9]+`), "GOMAXPROCS <N>"},
}

func maskLine(s string) string {
	for _, m := range readmeMasks {
		s = m.re.ReplaceAllString(s, m.repl)
	}
	return strings.TrimRight(s, " \t")
}

// isElision reports whether an expected line stands for any number of lines.
func isElision(s string) bool {
	t := strings.TrimSpace(s)
	return t == "..." || (len(t) > 7 && strings.HasPrefix(t, "... ") && strings.HasSuffix(t, " ..."))
}

// readmeStep is one command of a block and the output the README shows.
type readmeStep struct {
	cmd      string
	cmdLine  int // 0-based line of "$ cmd" in the README
	expected []string
}

// readmeBlock is one marked fenced block.
type readmeBlock struct {
	line       int // 0-based line of the opening fence
	withServer bool
	skipUnless string
	steps      []readmeStep
}

var markerRE = regexp.MustCompile(`^<!--\s*check:\s*(run|run-with-server)\s*(?:;\s*skip unless:\s*(.*?))?\s*-->\s*$`)

// parseREADME finds the marked blocks of the README's lines.
func parseREADME(lines []string) ([]readmeBlock, error) {
	var blocks []readmeBlock
	for i := 0; i < len(lines); i++ {
		m := markerRE.FindStringSubmatch(lines[i])
		if m == nil {
			if strings.Contains(lines[i], "check:") && strings.HasPrefix(strings.TrimSpace(lines[i]), "<!--") {
				return nil, fmt.Errorf("README.md:%d: unrecognised check marker %q", i+1, lines[i])
			}
			continue
		}
		if i+1 >= len(lines) || !strings.HasPrefix(lines[i+1], "```") {
			return nil, fmt.Errorf("README.md:%d: check marker not directly above a fenced block", i+1)
		}
		b := readmeBlock{line: i + 1, withServer: m[1] == "run-with-server", skipUnless: m[2]}
		j := i + 2
		for ; j < len(lines) && !strings.HasPrefix(lines[j], "```"); j++ {
			l := lines[j]
			if strings.HasPrefix(l, "$ ") {
				b.steps = append(b.steps, readmeStep{cmd: strings.TrimPrefix(l, "$ "), cmdLine: j})
				continue
			}
			if len(b.steps) == 0 {
				return nil, fmt.Errorf("README.md:%d: output line before the block's first \"$ \" command", j+1)
			}
			s := &b.steps[len(b.steps)-1]
			s.expected = append(s.expected, l)
		}
		if j >= len(lines) {
			return nil, fmt.Errorf("README.md:%d: unclosed fenced block", b.line+1)
		}
		if len(b.steps) == 0 {
			return nil, fmt.Errorf("README.md:%d: marked block has no \"$ \" command", b.line+1)
		}
		blocks = append(blocks, b)
		i = j
	}
	return blocks, nil
}

// matchLines matches actual lines against expected ones (with elisions).
// On success it returns, for each expected line, the index of the actual
// line it matched (-1 for an elision).
func matchLines(expected, actual []string) ([]int, bool) {
	pos := make([]int, len(expected))
	var rec func(e, a int) bool
	rec = func(e, a int) bool {
		if e == len(expected) {
			return a == len(actual)
		}
		if isElision(expected[e]) {
			pos[e] = -1
			for k := a; k <= len(actual); k++ {
				if rec(e+1, k) {
					return true
				}
			}
			return false
		}
		if a < len(actual) && maskLine(expected[e]) == maskLine(actual[a]) {
			pos[e] = a
			return rec(e+1, a+1)
		}
		return false
	}
	return pos, rec(0, 0)
}

var numberRE = regexp.MustCompile(`[-+−]?[0-9][0-9.,]*`)

// shapeKey is a line with its numbers and runs of spaces collapsed, used to
// place a segment between two elisions in a changed output.
func shapeKey(s string) string {
	return strings.Join(strings.Fields(numberRE.ReplaceAllString(maskLine(s), "#")), " ")
}

// keepLine is the line -update writes for an expected line placed at an
// actual one: the README's when the two differ only in masked timings
// (unless -update-timings), the real one otherwise.
func keepLine(expected, actual string) string {
	if !*updateTimings && maskLine(expected) == maskLine(actual) {
		return expected
	}
	return actual
}

// keepLines applies keepLine to lines placed one for one.
func keepLines(expected, actual []string) []string {
	out := append([]string(nil), actual...)
	for i := range out {
		if i < len(expected) {
			out[i] = keepLine(expected[i], out[i])
		}
	}
	return out
}

// updatedLines is the expected block rewritten from actual output, keeping
// the elisions (see the package comment). It fails when a segment between
// two elisions cannot be placed.
func updatedLines(expected, actual []string) ([]string, error) {
	if pos, ok := matchLines(expected, actual); ok {
		out := make([]string, len(expected))
		for i, p := range pos {
			if p < 0 {
				out[i] = expected[i]
			} else {
				out[i] = keepLine(expected[i], actual[p])
			}
		}
		return out, nil
	}
	// Split into segments around elisions.
	var segs [][]string
	var elisions []string
	cur := []string{}
	for _, l := range expected {
		if isElision(l) {
			segs = append(segs, cur)
			elisions = append(elisions, l)
			cur = []string{}
			continue
		}
		cur = append(cur, l)
	}
	segs = append(segs, cur)
	if len(elisions) == 0 {
		return keepLines(expected, actual), nil
	}
	first, last := len(segs[0]), len(segs[len(segs)-1])
	if first+last > len(actual) {
		return nil, fmt.Errorf("real output has %d lines, fewer than the %d kept around the elisions", len(actual), first+last)
	}
	out := keepLines(segs[0], actual[:first])
	a := first
	end := len(actual) - last
	for k := 1; k < len(segs)-1; k++ {
		out = append(out, elisions[k-1])
		seg := segs[k]
		if len(seg) == 0 {
			continue
		}
		key := shapeKey(seg[0])
		found := -1
		for i := a; i+len(seg) <= end; i++ {
			if shapeKey(actual[i]) == key {
				found = i
				break
			}
		}
		if found < 0 {
			return nil, fmt.Errorf("cannot place the lines after elision %d (starting %q) in the real output; edit the README block by hand", k, seg[0])
		}
		out = append(out, keepLines(seg, actual[found:found+len(seg)])...)
		a = found + len(seg)
	}
	out = append(out, elisions[len(elisions)-1])
	out = append(out, keepLines(segs[len(segs)-1], actual[end:])...)
	return out, nil
}

// readmeEnv holds the built binaries.
type readmeEnv struct {
	root, bin string
}

var (
	readmeBuildOnce sync.Once
	readmeBuilt     readmeEnv
	readmeBuildErr  error
)

func buildREADMEBinaries(t *testing.T) readmeEnv {
	t.Helper()
	readmeBuildOnce.Do(func() {
		root, err := filepath.Abs("..")
		if err != nil {
			readmeBuildErr = err
			return
		}
		bin, err := os.MkdirTemp("", "fadeloop-readme-bin-")
		if err != nil {
			readmeBuildErr = err
			return
		}
		for _, p := range []struct{ name, pkg string }{
			{"fadeloop", "./client/cmd/fadeloop"},
			{"fadeloopd", "./service/cmd/fadeloopd"},
		} {
			ctx, cancel := context.WithTimeout(context.Background(), 10*time.Minute)
			cmd := exec.CommandContext(ctx, "go", "build", "-o", filepath.Join(bin, p.name), p.pkg)
			cmd.Dir = root
			out, err := cmd.CombinedOutput()
			cancel()
			if err != nil {
				readmeBuildErr = fmt.Errorf("go build %s: %v\n%s", p.pkg, err, out)
				return
			}
		}
		readmeBuilt = readmeEnv{root: root, bin: bin}
	})
	if readmeBuildErr != nil {
		t.Fatal(readmeBuildErr)
	}
	return readmeBuilt
}

var (
	goRunRE    = regexp.MustCompile(`\bgo run \./client/cmd/fadeloop\b`)
	goRunDRE   = regexp.MustCompile(`\bgo run \./service/cmd/fadeloopd\b`)
	loopbackRE = regexp.MustCompile(`127\.0\.0\.1:(?:[0-9]+|PORT)\b`)
	serverCmd  = regexp.MustCompile(`^(?:fadeloop serve|fadeloopd)\b`)
	progressRE = regexp.MustCompile(`^progress(?:: | +[0-9.]+%)`)
)

// rewriteCommand turns a README command into the one run: the built
// binaries for `go run`, the live port for loopback addresses.
func rewriteCommand(cmd, addr string) string {
	cmd = goRunRE.ReplaceAllString(cmd, "fadeloop")
	cmd = goRunDRE.ReplaceAllString(cmd, "fadeloopd")
	if addr != "" {
		cmd = loopbackRE.ReplaceAllString(cmd, addr)
	}
	return cmd
}

// outputLines splits a command's output into lines, dropping the progress
// lines.
func outputLines(out string) []string {
	out = strings.TrimRight(out, "\n")
	if out == "" {
		return nil
	}
	var lines []string
	for _, l := range strings.Split(out, "\n") {
		if progressRE.MatchString(l) {
			continue
		}
		lines = append(lines, l)
	}
	return lines
}

// syncBuffer is a bytes.Buffer safe for a background process's output.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

func freeLoopbackAddr(t *testing.T) string {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := l.Addr().String()
	l.Close()
	return addr
}

// startServer runs cmd in the background until it accepts connections on
// addr and returns what it printed by then; the server is stopped with
// SIGTERM at the end of the test.
func startServer(t *testing.T, dir string, env []string, cmdline, addr string) string {
	t.Helper()
	cmd := exec.Command("sh", "-c", "exec "+cmdline)
	cmd.Dir, cmd.Env = dir, env
	var out syncBuffer
	cmd.Stdout, cmd.Stderr = &out, &out
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	done := make(chan struct{})
	go func() { cmd.Wait(); close(done) }()
	t.Cleanup(func() {
		cmd.Process.Signal(syscall.SIGTERM)
		select {
		case <-done:
		case <-time.After(20 * time.Second):
			cmd.Process.Kill()
			<-done
		}
	})
	deadline := time.Now().Add(60 * time.Second)
	for {
		select {
		case <-done:
			t.Fatalf("server %q exited before listening:\n%s", cmdline, out.String())
		default:
		}
		c, err := net.DialTimeout("tcp", addr, 200*time.Millisecond)
		if err == nil {
			c.Close()
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("server %q did not listen on %s within 60 s:\n%s", cmdline, addr, out.String())
		}
		time.Sleep(50 * time.Millisecond)
	}
	// The listening line is logged before Serve; give a slow machine a
	// moment to flush it.
	for i := 0; i < 100 && out.String() == ""; i++ {
		time.Sleep(20 * time.Millisecond)
	}
	return out.String()
}

// runBlock runs one block's commands and returns each step's output lines.
func runBlock(t *testing.T, env readmeEnv, b readmeBlock) [][]string {
	t.Helper()
	dir := t.TempDir()
	for _, d := range []string{"testdata", "proto", "client"} {
		if err := os.Symlink(filepath.Join(env.root, d), filepath.Join(dir, d)); err != nil {
			t.Fatal(err)
		}
	}
	procEnv := append(os.Environ(), "PATH="+env.bin+string(os.PathListSeparator)+os.Getenv("PATH"),
		"FADELOOP_STORE="+filepath.Join(dir, ".fadeloop-jobs")) // job stores: never the user cache
	if b.skipUnless != "" {
		c := exec.Command("sh", "-c", b.skipUnless)
		c.Dir, c.Env = dir, procEnv
		if out, err := c.CombinedOutput(); err != nil {
			t.Skipf("skipped: %q failed (%v): %s", b.skipUnless, err, out)
		}
	}
	outs := make([][]string, len(b.steps))
	addr, readmeAddr := "", ""
	steps := b.steps
	if b.withServer {
		addr = freeLoopbackAddr(t)
		for _, s := range steps {
			if readmeAddr = loopbackRE.FindString(s.cmd); readmeAddr != "" {
				break
			}
		}
		if serverCmd.MatchString(rewriteCommand(steps[0].cmd, "")) {
			out := startServer(t, dir, procEnv, rewriteCommand(steps[0].cmd, addr), addr)
			lines := outputLines(strings.ReplaceAll(out, addr, readmeAddr))
			// A server's lines are compared with the first ones it prints
			// (as many as the README shows, at least one).
			if n := max(len(steps[0].expected), 1); len(lines) > n {
				lines = lines[:n]
			}
			outs[0] = lines
			steps = steps[1:]
		} else {
			startServer(t, dir, procEnv, "fadeloopd -listen "+addr+" -metrics-listen ''", addr)
		}
	}
	off := len(b.steps) - len(steps)
	for i, s := range steps {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Minute)
		c := exec.CommandContext(ctx, "sh", "-c", rewriteCommand(s.cmd, addr))
		c.Dir, c.Env = dir, procEnv
		c.WaitDelay = 10 * time.Second // a child left holding the output pipe
		var out bytes.Buffer
		c.Stdout, c.Stderr = &out, &out
		start := time.Now()
		err := c.Run()
		cancel()
		if _, ok := err.(*exec.ExitError); err != nil && !ok {
			t.Fatalf("README.md:%d: %s: %v", s.cmdLine+1, s.cmd, err)
		}
		t.Logf("README.md:%d: %s (%.2f s)", s.cmdLine+1, s.cmd, time.Since(start).Seconds())
		text := out.String()
		if addr != "" && readmeAddr != "" {
			text = strings.ReplaceAll(text, addr, readmeAddr)
		}
		outs[off+i] = outputLines(text)
	}
	return outs
}

// TestREADME runs every marked block of README.md (see the package comment
// above for the convention) and compares its output with the README's; with
// -update it rewrites the marked blocks' output lines instead.
func TestREADME(t *testing.T) {
	path := filepath.Join("..", "README.md")
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(string(data), "\n")
	blocks, err := parseREADME(lines)
	if err != nil {
		t.Fatal(err)
	}
	if len(blocks) == 0 {
		t.Fatal("README.md has no <!-- check: run --> blocks")
	}
	env := buildREADMEBinaries(t)
	// replacements[cmdLine] = new output lines for that step.
	var mu sync.Mutex
	replacements := map[int][]string{}
	for _, b := range blocks {
		t.Run(fmt.Sprintf("line%d", b.line+1), func(t *testing.T) {
			outs := runBlock(t, env, b)
			for i, s := range b.steps {
				if *updateREADME {
					nl, err := updatedLines(s.expected, outs[i])
					if err != nil {
						t.Errorf("README.md:%d: %s: %v", s.cmdLine+1, s.cmd, err)
						continue
					}
					mu.Lock()
					replacements[s.cmdLine] = nl
					mu.Unlock()
					continue
				}
				if _, ok := matchLines(s.expected, outs[i]); !ok {
					t.Errorf("README.md:%d: output of %q differs from the README (rerun with -args -update after checking it):\n%s",
						s.cmdLine+1, s.cmd, lineDiff(s.expected, outs[i]))
				}
			}
		})
	}
	if !*updateREADME || t.Failed() {
		return
	}
	var out []string
	for i := 0; i < len(lines); i++ {
		out = append(out, lines[i])
		nl, ok := replacements[i]
		if !ok {
			continue
		}
		// Skip the old output lines of this step.
		j := i + 1
		for ; j < len(lines) && !strings.HasPrefix(lines[j], "$ ") && !strings.HasPrefix(lines[j], "```"); j++ {
		}
		out = append(out, nl...)
		i = j - 1
	}
	newData := strings.Join(out, "\n")
	if newData != string(data) {
		if err := os.WriteFile(path, []byte(newData), 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("rewrote %s", path)
	}
}

// lineDiff shows the expected and actual lines side by side, masked lines
// that differ marked with "!".
func lineDiff(expected, actual []string) string {
	var b strings.Builder
	b.WriteString("README shows:\n")
	for _, l := range expected {
		b.WriteString("  | " + l + "\n")
	}
	b.WriteString("the run printed:\n")
	for i, l := range actual {
		mark := " "
		if i >= len(expected) || (maskLine(expected[i]) != maskLine(l) && !isElision(expected[i])) {
			mark = "!"
		}
		b.WriteString(mark + " | " + l + "\n")
	}
	return b.String()
}
