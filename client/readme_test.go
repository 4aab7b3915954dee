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
	"flag"
	"fmt"
	"regexp"
	"strings"
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
