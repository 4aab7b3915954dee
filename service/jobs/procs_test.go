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
// before storing it (a worker stuck mid-unit, to be killed). With
// FADELOOP_JOBS_GATE_UNIT=INDEX and FADELOOP_JOBS_GATE_FILE=PATH the unit
// INDEX waits, once started, until PATH exists (a unit held in flight);
// FADELOOP_JOBS_CONCURRENCY sets the worker's slots.
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
	o.Concurrency, _ = strconv.Atoi(os.Getenv("FADELOOP_JOBS_CONCURRENCY"))
	if g, err := strconv.Atoi(os.Getenv("FADELOOP_JOBS_GATE_UNIT")); err == nil {
		gate := os.Getenv("FADELOOP_JOBS_GATE_FILE")
		o.run = func(ctx context.Context, u Unit) (*loop.Report, error) {
			for u.Index == g && ctx.Err() == nil {
				if _, err := os.Stat(gate); err == nil {
					break
				}
				time.Sleep(20 * time.Millisecond)
			}
			return RunUnit(ctx, u)
		}
	}
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

// startWorkerProc starts a worker process; env adds FADELOOP_JOBS_*
// settings of workerMain.
func startWorkerProc(t *testing.T, url, name string, env ...string) *workerProc {
	t.Helper()
	cmd := exec.Command(os.Args[0])
	cmd.Env = append(os.Environ(), roleEnv+"=worker", "FADELOOP_JOBS_URL="+url, "FADELOOP_JOBS_NAME="+name)
	cmd.Env = append(cmd.Env, env...)
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
//
// The order of events is fixed by the test, not left to timing: the NATS
// server is restarted only after the killed worker's unit has been stored
// again, and while one unit (the gated one) is held in flight by a worker,
// so the restart is always mid-sweep.
//
// Why the restart waits for the killed worker's unit: Attempts is
// JetStream's delivery count (NumDelivered). Before a restart the server's
// count is exact, so a unit delivered to the victim and stored later by
// another worker has Attempts >= 2 — that is asserted, and it fails if the
// worker reports anything but the delivery count (a constant 1, say). A
// restart is different: a server stopped before the victim's ack deadline
// (AckWait, 2 s) has passed holds the victim's deliveries only as pending
// records of its consumer state, and the Debian nats-server 2.9.10 (the
// one .ci/queue-check installs) restored the consumer without them in 2 of
// 95 runs of the earlier version of this test beside a CPU load (none in
// 45 runs with the embedded server of go.mod). In the run that logged the
// consumer, its delivered consumer sequence was 10 before the stop and 6
// just after the restart, its ack floor had passed the victim's two
// unacknowledged units, and both came back as first deliveries
// (NumDelivered 1) and were stored with Attempts 1. That version restarted
// after any 4 results, which on a loaded machine can come within the
// victim's ack deadline (there the server was stopped 1.2 s after it
// started). fadeloop reported the count the server gave it; the assertion
// depended on the restart coming after the redelivery, which the test now
// waits for. What a restart does guarantee is checked for every point:
// stored once, done, by a live worker, identical.
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
	victim := startWorkerProc(t, url, "victim", "FADELOOP_JOBS_WEDGE=1")
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

	// Two slots each, so that a slot held by the gated unit never keeps
	// the killed worker's unit waiting behind it.
	gated := (victimUnit + len(us)/2) % len(us)
	gate := filepath.Join(t.TempDir(), "gate")
	for _, name := range []string{"w1", "w2"} {
		startWorkerProc(t, url, name, "FADELOOP_JOBS_CONCURRENCY=2",
			"FADELOOP_JOBS_GATE_UNIT="+strconv.Itoa(gated), "FADELOOP_JOBS_GATE_FILE="+gate)
	}

	got := map[int]Result{}
	var n atomic.Int32
	victimStored := make(chan struct{})
	errc := make(chan error, 1)
	go func() {
		errc <- j.Results(ctx, func(r Result) error {
			if _, dup := got[r.Index]; dup {
				t.Errorf("result %d delivered twice", r.Index)
			}
			got[r.Index] = r
			if r.Index == victimUnit {
				close(victimStored)
			}
			n.Add(1)
			return nil
		})
	}()
	select {
	case <-victimStored:
	case err := <-errc:
		t.Fatalf("Results ended before the killed worker's unit %d was stored: %v", victimUnit, err)
	case <-ctx.Done():
		t.Fatalf("the killed worker's unit %d was not stored again (%d results)", victimUnit, n.Load())
	}
	for n.Load() < 4 {
		if ctx.Err() != nil {
			t.Fatalf("only %d results before the restart", n.Load())
		}
		time.Sleep(20 * time.Millisecond)
	}
	stopNATS(t, srv)
	before := n.Load()
	srv = startNATS(t, dir, port)
	if err := os.WriteFile(gate, nil, 0o600); err != nil {
		t.Fatal(err)
	}
	if err := <-errc; err != nil {
		t.Fatalf("Results after the restart: %v (%d of %d)", err, len(got), len(us))
	}
	t.Logf("victim's unit %d, gated unit %d; %d of %d results before the NATS restart", victimUnit, gated, before, len(us))
	if before == int32(len(us)) {
		t.Errorf("all results were in before the restart: the restart did not happen mid-sweep")
	}
	want := directResults(t, us)
	for i, w := range want {
		if c := canon(t, got[i]); c != w {
			t.Errorf("point %d over three workers differs from the single-process result", i)
		}
		if r := got[i]; r.Status != StatusDone || r.Attempts < 1 || r.Worker == "victim" {
			t.Errorf("point %d: status %s, attempts %d by %q, want done by a live worker", i, r.Status, r.Attempts, r.Worker)
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
