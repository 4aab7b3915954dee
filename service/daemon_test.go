package service

import (
	"context"
	"log/slog"
	"net/http"
	"regexp"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

func TestRunDaemonServesThenDrains(t *testing.T) {
	var logs syncBuffer
	srv, err := NewServer(Config{Logger: slog.New(slog.NewTextHandler(&logs, nil))})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() {
		done <- RunDaemon(ctx, context.Background(), srv, DaemonOptions{Listen: "127.0.0.1:0", MetricsListen: "127.0.0.1:0", DrainTimeout: 5 * time.Second})
	}()
	deadline := time.Now().Add(5 * time.Second)
	for !strings.Contains(logs.String(), "grpc_addr=127.0.0.1:") {
		if time.Now().After(deadline) {
			t.Fatalf("no listening line in the log:\n%s", logs.String())
		}
		time.Sleep(10 * time.Millisecond)
	}
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("RunDaemon: %v", err)
		}
	case <-time.After(guard):
		t.Fatal("RunDaemon did not return after its context ended")
	}
	for _, want := range []string{"metrics listening", "draining", "stopped"} {
		if !strings.Contains(logs.String(), want) {
			t.Errorf("log lacks %q:\n%s", want, logs.String())
		}
	}
}

func TestRunDaemonBadListenAddress(t *testing.T) {
	srv, err := NewServer(Config{Logger: slog.New(slog.DiscardHandler)})
	if err != nil {
		t.Fatal(err)
	}
	err = RunDaemon(context.Background(), context.Background(), srv, DaemonOptions{Listen: "256.0.0.1:1"})
	if err == nil || !strings.Contains(err.Error(), "listen 256.0.0.1:1") {
		t.Fatalf("got %v, want a listen error naming the address", err)
	}
}

func TestServerTLSConfigRules(t *testing.T) {
	for _, c := range []struct {
		cert, key, ca, want string
	}{
		{"", "", "ca.pem", "client CA needs"},
		{"c.pem", "", "", "go together"},
		{"", "k.pem", "", "go together"},
		{"/nonexistent/c.pem", "/nonexistent/k.pem", "", "load TLS key pair"},
	} {
		if _, err := ServerTLSConfig(c.cert, c.key, c.ca); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("ServerTLSConfig(%q, %q, %q) = %v, want error with %q", c.cert, c.key, c.ca, err, c.want)
		}
	}
	if tc, err := ServerTLSConfig("", "", ""); tc != nil || err != nil {
		t.Errorf("plaintext: got %v, %v", tc, err)
	}
}

// startDaemon runs RunDaemon in the background and returns the bound gRPC
// address (and the whole log so far, for other addresses).
func startDaemon(t *testing.T, ctx, stop context.Context, srv *Server, logs *syncBuffer, o DaemonOptions) (addr string, done <-chan error) {
	t.Helper()
	ch := make(chan error, 1)
	go func() { ch <- RunDaemon(ctx, stop, srv, o) }()
	re := regexp.MustCompile(`grpc_addr=(127\.0\.0\.1:\d+)`)
	eventually(t, "listening line", func() bool { return re.MatchString(logs.String()) })
	return re.FindStringSubmatch(logs.String())[1], ch
}

// On SIGTERM (ctx ends) health turns NOT_SERVING for the drain notice while
// calls are still accepted, so that load balancers move traffic first.
func TestDrainNoticeKeepsServingWhileNotServing(t *testing.T) {
	var logs syncBuffer
	srv, err := NewServer(Config{DrainNotice: 10 * time.Minute, Logger: slog.New(slog.NewTextHandler(&logs, nil))})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	stop, hardStop := context.WithCancel(context.Background())
	defer hardStop()
	addr, done := startDaemon(t, ctx, stop, srv, &logs, DaemonOptions{Listen: "127.0.0.1:0", DrainTimeout: time.Minute})
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	hc := healthpb.NewHealthClient(conn)
	cancel() // the signal
	eventually(t, "health NOT_SERVING", func() bool {
		r, err := hc.Check(context.Background(), &healthpb.HealthCheckRequest{})
		return err == nil && r.GetStatus() == healthpb.HealthCheckResponse_NOT_SERVING
	})
	// Still inside the notice: a new call on a new connection is served.
	conn2, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn2.Close()
	if err := callGains(context.Background(), pb.NewChannelServiceClient(conn2), smallGains()); err != nil {
		t.Fatalf("call during the drain notice: %v", err)
	}
	hardStop() // second signal: ends the notice and the drain
	select {
	case err := <-done:
		if err != nil {
			t.Fatal(err)
		}
	case <-time.After(guard):
		t.Fatal("RunDaemon did not return after the second signal")
	}
	if !strings.Contains(logs.String(), "drain_notice=10m0s") {
		t.Errorf("draining line lacks the notice:\n%s", logs.String())
	}
}

// The profiler listens on loopback only, and only when asked.
func TestPprofListener(t *testing.T) {
	var logs syncBuffer
	srv, err := NewServer(Config{Logger: slog.New(slog.NewTextHandler(&logs, nil))})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	_, done := startDaemon(t, ctx, context.Background(), srv, &logs, DaemonOptions{Listen: "127.0.0.1:0", PprofListen: "127.0.0.1:0", DrainTimeout: time.Minute})
	re := regexp.MustCompile(`pprof_addr=(127\.0\.0\.1:\d+)`)
	eventually(t, "pprof line", func() bool { return re.MatchString(logs.String()) })
	resp, err := http.Get("http://" + re.FindStringSubmatch(logs.String())[1] + "/debug/pprof/cmdline")
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		t.Errorf("pprof status %d", resp.StatusCode)
	}
	cancel()
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	for _, a := range []string{"0.0.0.0:0", ":0", "[::]:0", "192.0.2.1:6060"} {
		srv2, _ := NewServer(Config{Logger: slog.New(slog.DiscardHandler)})
		err := RunDaemon(context.Background(), context.Background(), srv2, DaemonOptions{Listen: "127.0.0.1:0", PprofListen: a})
		if err == nil || !strings.Contains(err.Error(), "not a loopback address") {
			t.Errorf("pprof on %s: %v, want refused", a, err)
		}
	}
}
