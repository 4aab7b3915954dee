package jobs

import (
	"bufio"
	"context"
	"fmt"
	"net"
	"os"
	"os/exec"
	"os/signal"
	"path/filepath"
	"strconv"
	"strings"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"github.com/fadeloop/fadeloop/loop"
)

// The test binary doubles as a worker process and, when no nats-server
// program is installed, as the external NATS server process.
const roleEnv = "FADELOOP_JOBS_TEST_ROLE"

func TestMain(m *testing.M) {
	switch os.Getenv(roleEnv) {
	case "worker":
		os.Exit(workerMain())
	case "nats":
		os.Exit(natsMain())
	}
	os.Exit(m.Run())
}

// workerMain runs a worker against $FADELOOP_JOBS_URL until SIGTERM,
// printing "start INDEX ATTEMPT" as each unit starts. With
// FADELOOP_JOBS_WEDGE=1 the worker computes its first unit and then hangs
// before storing it (a worker stuck mid-unit, to be killed).
func workerMain() int {
	ctx, stop := signal.NotifyContext(context.Background(), syscall.SIGTERM, syscall.SIGINT)
	defer stop()
	q, err := Connect(ctx, os.Getenv("FADELOOP_JOBS_URL"), Config{AckWait: 2 * time.Second})
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 1
	}
	defer q.Close()
	o := WorkerOptions{Name: os.Getenv("FADELOOP_JOBS_NAME"), OnStart: func(u Unit, attempt int) {
		fmt.Printf("start %d %d\n", u.Index, attempt)
	}}
	if os.Getenv("FADELOOP_JOBS_WEDGE") == "1" {
		o.run = func(ctx context.Context, u Unit) (*loop.Report, error) {
			rep, err := RunUnit(ctx, u)
			fmt.Println("wedged")
			<-ctx.Done()
			return rep, err
		}
	}
	_ = q.RunWorker(ctx, o)
	return 0
}

// natsMain runs an embedded server on $FADELOOP_JOBS_PORT with the store
// $FADELOOP_JOBS_STORE until SIGTERM.
func natsMain() int {
	port, _ := strconv.Atoi(os.Getenv("FADELOOP_JOBS_PORT"))
	e, err := startServer(os.Getenv("FADELOOP_JOBS_STORE"), port)
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 1
	}
	c := make(chan os.Signal, 1)
	signal.Notify(c, syscall.SIGTERM, syscall.SIGINT)
	fmt.Println("ready")
	<-c
	e.Shutdown()
	return 0
}

func freePort(t *testing.T) int {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

// startNATS starts an external NATS server with JetStream on port, storing
// under dir: the nats-server program when installed (Debian package
// nats-server), else this test binary as an embedded server process.
func startNATS(t *testing.T, dir string, port int) *exec.Cmd {
	t.Helper()
	var cmd *exec.Cmd
	if path, err := exec.LookPath("nats-server"); err == nil {
		cmd = exec.Command(path, "-js", "-sd", dir, "-a", "127.0.0.1", "-p", strconv.Itoa(port))
	} else {
		t.Logf("no nats-server program (apt-get install nats-server): using the embedded server in a child process")
		cmd = exec.Command(os.Args[0])
		cmd.Env = append(os.Environ(), roleEnv+"=nats", "FADELOOP_JOBS_PORT="+strconv.Itoa(port), "FADELOOP_JOBS_STORE="+dir)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	for range 300 {
		if c, err := net.Dial("tcp", fmt.Sprintf("127.0.0.1:%d", port)); err == nil {
			c.Close()
			return cmd
		}
		time.Sleep(100 * time.Millisecond)
	}
	cmd.Process.Kill()
	t.Fatalf("NATS server on port %d did not start", port)
	return nil
}

// stopNATS stops the server gracefully (SIGTERM) and waits for it.
func stopNATS(t *testing.T, cmd *exec.Cmd) {
	t.Helper()
	_ = cmd.Process.Signal(syscall.SIGTERM)
	_ = cmd.Wait()
}

type workerProc struct {
	cmd   *exec.Cmd
	lines chan string
}

func startWorkerProc(t *testing.T, url, name string, wedge bool) *workerProc {
	t.Helper()
	cmd := exec.Command(os.Args[0])
	cmd.Env = append(os.Environ(), roleEnv+"=worker", "FADELOOP_JOBS_URL="+url, "FADELOOP_JOBS_NAME="+name)
	if wedge {
		cmd.Env = append(cmd.Env, "FADELOOP_JOBS_WEDGE=1")
	}
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	cmd.Stderr = os.Stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	w := &workerProc{cmd: cmd, lines: make(chan string, 1000)}
	go func() {
		s := bufio.NewScanner(out)
		for s.Scan() {
			w.lines <- s.Text()
		}
		close(w.lines)
	}()
	t.Cleanup(func() {
		_ = cmd.Process.Signal(syscall.SIGTERM)
		_ = cmd.Wait()
	})
	return w
}

// TestWorkerProcessesKillAndRestart: an external NATS server and three
// worker processes. One worker is killed (SIGKILL) in the middle of a unit;
// later the NATS server is stopped and restarted on the same store while
// the sweep runs. Every point ends stored exactly once, bit-identical to
// the single-process result, the killed worker's unit by another worker on
// a later delivery.
func TestWorkerProcessesKillAndRestart(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 120*time.Second)
	defer cancel()
	dir := filepath.Join(t.TempDir(), "store")
	port := freePort(t)
	url := fmt.Sprintf("nats://127.0.0.1:%d", port)
	srv := startNATS(t, dir, port)
	defer func() { stopNATS(t, srv) }()

	q, err := Connect(ctx, url, Config{AckWait: 2 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	defer q.Close()
	p, us := mustPrepare(t, tinySpec(1500, 6))
	j, _, err := q.Submit(ctx, KindSweepPoint, us, p.Spec)
	if err != nil {
		t.Fatal(err)
	}

	// The victim takes a unit, computes it and hangs before storing it.
	victim := startWorkerProc(t, url, "victim", true)
	victimUnit := -1
	for victimUnit < 0 {
		select {
		case l, ok := <-victim.lines:
			if !ok {
				t.Fatal("victim worker exited")
			}
			if f := strings.Fields(l); len(f) == 3 && f[0] == "start" {
				victimUnit, _ = strconv.Atoi(f[1])
			}
		case <-ctx.Done():
			t.Fatal("victim never started a unit")
		}
	}
	for l := range victim.lines {
		if l == "wedged" {
			break
		}
	}
	if err := victim.cmd.Process.Kill(); err != nil {
		t.Fatal(err)
	}
	_ = victim.cmd.Wait()
	startWorkerProc(t, url, "w1", false)
	startWorkerProc(t, url, "w2", false)

	got := map[int]Result{}
	var n atomic.Int32
	errc := make(chan error, 1)
	go func() {
		errc <- j.Results(ctx, func(r Result) error {
			if _, dup := got[r.Index]; dup {
				t.Errorf("result %d delivered twice", r.Index)
			}
			got[r.Index] = r
			n.Add(1)
			return nil
		})
	}()
	for n.Load() < 4 {
		if ctx.Err() != nil {
			t.Fatalf("only %d results before the restart", n.Load())
		}
		time.Sleep(20 * time.Millisecond)
	}
	stopNATS(t, srv)
	before := n.Load()
	srv = startNATS(t, dir, port)
	if err := <-errc; err != nil {
		t.Fatalf("Results after the restart: %v (%d of %d)", err, len(got), len(us))
	}
	t.Logf("victim's unit %d; %d of %d results before the NATS restart", victimUnit, before, len(us))
	if before == int32(len(us)) {
		t.Errorf("all results were in before the restart: the restart did not happen mid-sweep")
	}
	want := directResults(t, us)
	for i, w := range want {
		if c := canon(t, got[i]); c != w {
			t.Errorf("point %d over three workers differs from the single-process result", i)
		}
		h, err := q.results.History(ctx, fmt.Sprintf("%s.%d", j.ID, i))
		if err != nil || len(h) != 1 {
			t.Errorf("point %d stored %d times (%v), want once", i, len(h), err)
		}
	}
	if r := got[victimUnit]; r.Attempts < 2 || r.Worker == "victim" || r.Status != StatusDone {
		t.Errorf("killed worker's unit %d: attempts %d by %q status %s, want a later delivery by another worker", victimUnit, r.Attempts, r.Worker, r.Status)
	}
}
