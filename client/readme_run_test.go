package client_test

import (
	"bytes"
	"context"
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
