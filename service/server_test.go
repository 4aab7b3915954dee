package service

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"errors"
	"io"
	"math/big"
	"net"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	reflectionpb "google.golang.org/grpc/reflection/grpc_reflection_v1"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// waitGate blocks until gate is closed or the call is cancelled (as a real
// handler would stop).
func waitGate(ctx context.Context, gate <-chan struct{}) {
	select {
	case <-gate:
	case <-ctx.Done():
	}
}

func smallGains() *pb.StreamGainsRequest {
	return &pb.StreamGainsRequest{Channel: eva(10), Links: 1, Samples: 100, Seed: 1}
}

// callGains runs a StreamGains call to its end.
func callGains(ctx context.Context, c pb.ChannelServiceClient, req *pb.StreamGainsRequest) error {
	st, err := c.StreamGains(ctx, req)
	if err != nil {
		return err
	}
	_, err = drain(st.Recv)
	return err
}

func TestHealthAndReflection(t *testing.T) {
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{})
			hc := healthpb.NewHealthClient(env.conn)
			for _, svc := range []string{"", "fadeloop.v1.ChannelService", "fadeloop.v1.SimulationService", "fadeloop.v1.LoopService", "fadeloop.v1.InfoService"} {
				r, err := hc.Check(context.Background(), &healthpb.HealthCheckRequest{Service: svc})
				if err != nil {
					t.Fatalf("health %q: %v", svc, err)
				}
				if r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
					t.Errorf("health %q = %v", svc, r.GetStatus())
				}
			}
			rc := reflectionpb.NewServerReflectionClient(env.conn)
			st, err := rc.ServerReflectionInfo(context.Background())
			if err != nil {
				t.Fatal(err)
			}
			if err := st.Send(&reflectionpb.ServerReflectionRequest{MessageRequest: &reflectionpb.ServerReflectionRequest_ListServices{}}); err != nil {
				t.Fatal(err)
			}
			resp, err := st.Recv()
			if err != nil {
				t.Fatal(err)
			}
			got := map[string]bool{}
			for _, s := range resp.GetListServicesResponse().GetService() {
				got[s.GetName()] = true
			}
			for _, want := range []string{"fadeloop.v1.ChannelService", "fadeloop.v1.SimulationService",
				"fadeloop.v1.LoopService", "fadeloop.v1.InfoService", "grpc.health.v1.Health"} {
				if !got[want] {
					t.Errorf("reflection does not list %s (got %v)", want, got)
				}
			}
			_ = st.CloseSend()
		})
	}
}

func TestAdmissionLimit(t *testing.T) {
	gate := make(chan struct{})
	entered := make(chan struct{}, 4)
	cfg := Config{MaxConcurrentRuns: 1, QueueLength: 1, QueueTimeout: 5 * time.Second, RetryAfter: 3 * time.Second}
	cfg.testHook = func(ctx context.Context, method string) {
		entered <- struct{}{}
		waitGate(ctx, gate)
	}
	env := startEnv(t, viaBufconn, cfg)
	errs := make(chan error, 2)
	go func() { errs <- callGains(context.Background(), env.channel, smallGains()) }()
	<-entered // the first call holds the only run slot
	go func() { errs <- callGains(context.Background(), env.channel, smallGains()) }()
	// Wait until the second call sits in the queue.
	deadline := time.Now().Add(2 * time.Second)
	for env.srv.runs.waiting.Load() != 1 {
		if time.Now().After(deadline) {
			t.Fatal("second call never queued")
		}
		time.Sleep(time.Millisecond)
	}
	// The third finds the slot busy and the queue full.
	err := callGains(context.Background(), env.channel, smallGains())
	st := wantCode(t, err, codes.ResourceExhausted)
	var retry *errdetails.RetryInfo
	for _, d := range st.Details() {
		if r, ok := d.(*errdetails.RetryInfo); ok {
			retry = r
		}
	}
	if retry == nil || retry.GetRetryDelay().AsDuration() != 3*time.Second {
		t.Errorf("RetryInfo = %v, want a 3 s retry delay", retry)
	}
	if !strings.Contains(st.Message(), "max_concurrent_runs") {
		t.Errorf("message %q does not name the limit", st.Message())
	}
	close(gate)
	for range 2 {
		if err := <-errs; err != nil {
			t.Errorf("admitted call failed: %v", err)
		}
	}
}

func TestAdmissionQueueTimeout(t *testing.T) {
	gate := make(chan struct{})
	cfg := Config{MaxConcurrentRuns: 1, QueueLength: 4, QueueTimeout: 50 * time.Millisecond}
	entered := make(chan struct{}, 1)
	cfg.testHook = func(ctx context.Context, _ string) { entered <- struct{}{}; waitGate(ctx, gate) }
	env := startEnv(t, viaBufconn, cfg)
	defer close(gate)
	go func() { _ = callGains(context.Background(), env.channel, smallGains()) }()
	<-entered
	err := callGains(context.Background(), env.channel, smallGains())
	st := wantCode(t, err, codes.ResourceExhausted)
	if !strings.Contains(st.Message(), "queue timeout") {
		t.Errorf("message %q does not say the queue wait ran out", st.Message())
	}
}

func TestPanicRecovery(t *testing.T) {
	cfg := Config{}
	cfg.testHook = func(_ context.Context, method string) {
		if method == "StreamGains" {
			panic("injected failure")
		}
	}
	env := startEnv(t, viaBufconn, cfg)
	err := callGains(context.Background(), env.channel, smallGains())
	st := wantCode(t, err, codes.Internal)
	if !strings.Contains(st.Message(), "injected failure") {
		t.Errorf("message %q", st.Message())
	}
	logs := env.logs.String()
	if !strings.Contains(logs, "panic in handler") || !strings.Contains(logs, "goroutine") {
		t.Errorf("panic stack not logged:\n%s", logs)
	}
	if !strings.Contains(logs, `"code":"Internal"`) {
		t.Errorf("call log line lacks code Internal:\n%s", logs)
	}
	// The server keeps serving.
	cfg2 := env.srv
	_ = cfg2
	if err := callGains(context.Background(), env.channel, &pb.StreamGainsRequest{Channel: eva(10), Links: 0, Samples: 1}); err == nil {
		t.Error("invalid call after panic succeeded")
	} else {
		wantCode(t, err, codes.InvalidArgument)
	}
}

func TestCallLogLine(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	if err := callGains(context.Background(), env.channel, smallGains()); err != nil {
		t.Fatal(err)
	}
	logs := env.logs.String()
	for _, want := range []string{`"method":"/fadeloop.v1.ChannelService/StreamGains"`, `"code":"OK"`, `"duration"`, `"cost_tap_slots":900`} {
		if !strings.Contains(logs, want) {
			t.Errorf("log lacks %s:\n%s", want, logs)
		}
	}
}

func TestGracefulShutdownCompletesInFlightCall(t *testing.T) {
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			gate := make(chan struct{})
			entered := make(chan struct{}, 1)
			cfg := Config{DrainNotice: 100 * time.Millisecond}
			cfg.testHook = func(ctx context.Context, _ string) { entered <- struct{}{}; waitGate(ctx, gate) }
			env := startEnv(t, tr, cfg)
			hc := healthpb.NewHealthClient(env.conn)
			watch, err := hc.Watch(context.Background(), &healthpb.HealthCheckRequest{})
			if err != nil {
				t.Fatal(err)
			}
			if r, err := watch.Recv(); err != nil || r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
				t.Fatalf("health watch before drain: %v %v", r, err)
			}
			done := make(chan error, 1)
			go func() { done <- callGains(context.Background(), env.channel, smallGains()) }()
			<-entered
			shut := make(chan error, 1)
			go func() {
				ctx, cancel := context.WithTimeout(context.Background(), guard)
				defer cancel()
				shut <- env.srv.Shutdown(ctx)
			}()
			// The watcher hears NOT_SERVING, then its stream ends (so that it
			// does not hold the drain open).
			if r, err := watch.Recv(); err != nil || r.GetStatus() != healthpb.HealthCheckResponse_NOT_SERVING {
				t.Fatalf("health watch during drain: %v %v", r, err)
			}
			if _, err := watch.Recv(); err == nil {
				t.Fatal("health watch stream did not end during drain")
			}
			select {
			case err := <-shut:
				t.Fatalf("Shutdown returned (%v) while a call was in flight", err)
			case <-time.After(50 * time.Millisecond):
			}
			close(gate)
			if err := <-done; err != nil {
				t.Errorf("in-flight call failed during drain: %v", err)
			}
			if err := <-shut; err != nil {
				t.Errorf("Shutdown: %v", err)
			}
		})
	}
}

func TestShutdownTimeoutCancelsCalls(t *testing.T) {
	gate := make(chan struct{})
	defer close(gate)
	entered := make(chan struct{}, 1)
	cfg := Config{}
	cfg.testHook = func(ctx context.Context, _ string) { entered <- struct{}{}; waitGate(ctx, gate) }
	env := startEnv(t, viaBufconn, cfg)
	done := make(chan error, 1)
	go func() { done <- callGains(context.Background(), env.channel, smallGains()) }()
	<-entered
	ctx, cancel := context.WithTimeout(context.Background(), 50*time.Millisecond)
	defer cancel()
	if err := env.srv.Shutdown(ctx); !errors.Is(err, context.DeadlineExceeded) {
		t.Errorf("Shutdown = %v, want deadline exceeded", err)
	}
	if err := <-done; err == nil {
		t.Error("call survived a forced stop")
	}
}

func TestMetricsEndpoint(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	if err := callGains(context.Background(), env.channel, smallGains()); err != nil {
		t.Fatal(err)
	}
	_ = callGains(context.Background(), env.channel, &pb.StreamGainsRequest{})
	hs := httptest.NewServer(env.srv.MetricsHandler())
	defer hs.Close()
	resp, err := http.Get(hs.URL)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	body, _ := io.ReadAll(resp.Body)
	text := string(body)
	for _, want := range []string{
		`grpc_server_handled_total{grpc_code="OK",grpc_method="StreamGains",grpc_service="fadeloop.v1.ChannelService",grpc_type="server_stream"} 1`,
		`grpc_server_handling_seconds_bucket`,
		`fadeloop_runs_in_flight 0`,
		`fadeloop_gain_samples_total 900`,
		`fadeloop_rejected_total{reason="invalid"} 1`,
		`fadeloop_simulated_user_slots_total`,
	} {
		if !strings.Contains(text, want) {
			t.Errorf("metrics lack %s", want)
		}
	}
}

// testPKI is a CA with a server and a client certificate, made in the test.
type testPKI struct {
	caPool            *x509.CertPool
	server, client    tls.Certificate
	otherCA           *x509.CertPool
	clientFromOtherCA tls.Certificate
}

func newCA(t *testing.T, name string) (*x509.Certificate, *ecdsa.PrivateKey) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber:          big.NewInt(1),
		Subject:               pkix.Name{CommonName: name},
		NotBefore:             time.Now().Add(-time.Hour),
		NotAfter:              time.Now().Add(time.Hour),
		KeyUsage:              x509.KeyUsageCertSign | x509.KeyUsageDigitalSignature,
		BasicConstraintsValid: true,
		IsCA:                  true,
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	cert, err := x509.ParseCertificate(der)
	if err != nil {
		t.Fatal(err)
	}
	return cert, key
}

func issue(t *testing.T, ca *x509.Certificate, caKey *ecdsa.PrivateKey, serial int64, name string, usage x509.ExtKeyUsage) tls.Certificate {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(serial),
		Subject:      pkix.Name{CommonName: name},
		NotBefore:    time.Now().Add(-time.Hour),
		NotAfter:     time.Now().Add(time.Hour),
		KeyUsage:     x509.KeyUsageDigitalSignature,
		ExtKeyUsage:  []x509.ExtKeyUsage{usage},
		DNSNames:     []string{"localhost"},
		IPAddresses:  []net.IP{net.ParseIP("127.0.0.1")},
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, ca, &key.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	return tls.Certificate{Certificate: [][]byte{der}, PrivateKey: key}
}

func newTestPKI(t *testing.T) *testPKI {
	ca, caKey := newCA(t, "fadeloop test CA")
	other, otherKey := newCA(t, "unrelated CA")
	p := &testPKI{caPool: x509.NewCertPool(), otherCA: x509.NewCertPool()}
	p.caPool.AddCert(ca)
	p.otherCA.AddCert(other)
	p.server = issue(t, ca, caKey, 2, "fadeloopd", x509.ExtKeyUsageServerAuth)
	p.client = issue(t, ca, caKey, 3, "client", x509.ExtKeyUsageClientAuth)
	p.clientFromOtherCA = issue(t, other, otherKey, 4, "intruder", x509.ExtKeyUsageClientAuth)
	return p
}

func TestTLS(t *testing.T) {
	p := newTestPKI(t)
	serverTLS := &tls.Config{Certificates: []tls.Certificate{p.server}, MinVersion: tls.VersionTLS12}
	t.Run("server TLS", func(t *testing.T) {
		creds := credentials.NewTLS(&tls.Config{RootCAs: p.caPool, ServerName: "localhost"})
		env := startEnv(t, viaLoopback, Config{TLS: serverTLS}, grpc.WithTransportCredentials(creds))
		if err := callGains(context.Background(), env.channel, smallGains()); err != nil {
			t.Fatalf("call over TLS: %v", err)
		}
	})
	t.Run("server TLS rejects an untrusting client", func(t *testing.T) {
		creds := credentials.NewTLS(&tls.Config{RootCAs: p.otherCA, ServerName: "localhost"})
		env := startEnv(t, viaLoopback, Config{TLS: serverTLS}, grpc.WithTransportCredentials(creds))
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		wantCode(t, callGains(ctx, env.channel, smallGains()), codes.Unavailable)
	})
	mtls := &tls.Config{Certificates: []tls.Certificate{p.server}, ClientCAs: p.caPool,
		ClientAuth: tls.RequireAndVerifyClientCert, MinVersion: tls.VersionTLS12}
	t.Run("mutual TLS", func(t *testing.T) {
		creds := credentials.NewTLS(&tls.Config{RootCAs: p.caPool, ServerName: "localhost", Certificates: []tls.Certificate{p.client}})
		env := startEnv(t, viaLoopback, Config{TLS: mtls}, grpc.WithTransportCredentials(creds))
		if err := callGains(context.Background(), env.channel, smallGains()); err != nil {
			t.Fatalf("call over mutual TLS: %v", err)
		}
	})
	for name, certs := range map[string][]tls.Certificate{
		"mutual TLS rejects a client without a certificate": nil,
		"mutual TLS rejects a certificate of another CA":    {p.clientFromOtherCA},
	} {
		t.Run(name, func(t *testing.T) {
			creds := credentials.NewTLS(&tls.Config{RootCAs: p.caPool, ServerName: "localhost", Certificates: certs})
			env := startEnv(t, viaLoopback, Config{TLS: mtls}, grpc.WithTransportCredentials(creds))
			ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
			defer cancel()
			err := callGains(ctx, env.channel, smallGains())
			if err == nil {
				t.Fatal("call succeeded without a trusted client certificate")
			}
			wantCode(t, err, codes.Unavailable)
		})
	}
}

func TestConfigDefaultsAndErrors(t *testing.T) {
	c, err := Config{}.withDefaults()
	if err != nil {
		t.Fatal(err)
	}
	if c.MaxCost != DefaultMaxCost || c.MaxConcurrentRuns < 1 || c.QueueLength != c.MaxConcurrentRuns ||
		c.MaxCallDuration != DefaultMaxCallDuration || c.connectionAgeGrace() <= c.MaxCallDuration {
		t.Errorf("defaults: %+v", c)
	}
	if _, err := NewServer(Config{MaxCost: -1}); err == nil || !strings.Contains(err.Error(), "MaxCost") {
		t.Errorf("negative MaxCost: %v", err)
	}
	if _, err := NewServer(Config{MaxSendMessageBytes: 100}); err == nil || !strings.Contains(err.Error(), "MaxSendMessageBytes") {
		t.Errorf("tiny MaxSendMessageBytes: %v", err)
	}
}

// TestConcurrentCallsDoNotRace exercises the shared state (admission,
// metrics, validator) from several goroutines; run with -race.
func TestConcurrentCallsDoNotRace(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{MaxConcurrentRuns: 2, QueueLength: 8})
	var wg sync.WaitGroup
	for i := range 8 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			req := smallGains()
			if i%3 == 0 {
				req.Links = 0
			}
			err := callGains(context.Background(), env.channel, req)
			if i%3 == 0 {
				if err == nil {
					t.Error("invalid call succeeded")
				}
			} else if err != nil {
				t.Errorf("call %d: %v", i, err)
			}
		}()
	}
	wg.Wait()
}
