package client

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"log/slog"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"sync/atomic"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"github.com/fadeloop/fadeloop/service"
)

// tinyScenario is a 4-user, 1 500-slot scenario (a few ms of engine time).
func tinyScenario(t *testing.T) *pb.Scenario {
	t.Helper()
	src := `
name: tiny
receiver: {chip_rate_hz: 3.84e6, bit_rate_bps: 12.2e3, noise_figure_db: 5, other_cell_ratio: 0.2, sir_averaging_slots: 1}
groups:
  - name: g
    count: 4
    placement: PLACEMENT_UNIFORM_DISTANCE
    min_distance_m: 100
    max_distance_m: 600
    speeds: [{speed_kmh: 30, weight: 1}]
    carrier_frequency_hz: 2e9
    profile: PEDA
    generator: GENERATOR_DEFAULT
    path_loss: {model: PATH_LOSS_MODEL_LOG_DISTANCE, ref_distance_m: 10, ref_loss_db: 52.9, exponent: 3.76}
    activity_factor: 1
inner_loop: {mode: INNER_MODE_CLOSED_LOOP, command: COMMAND_FIXED_STEP, update_rate_hz: 1500, step_db: 1,
  feedback_delay_slots: 1, min_power_dbm: -50, max_power_dbm: 24, initial_power: INITIAL_POWER_FIXED, initial_power_dbm: 0}
outer_loop: {enabled: false, bler_target: 0.1, block_slots: 15, up_step_db: 0.5, min_target_db: -10, max_target_db: 30, initial_target_db: 5}
link: {kind: LINK_KIND_LOGISTIC, threshold_db: 3, slope_db: 1, effective_sir: EFFECTIVE_SIR_LINEAR_MEAN, eesm_beta: 1}
run: {slots: 1500, warmup_slots: 150, seed: 7, replications: 1, outage_margin_db: 3, distance_bins: 2, batches: 20}
`
	sf, err := ParseScenario("tiny.yaml", []byte(src))
	if err != nil {
		t.Fatal(err)
	}
	return sf.Scenario
}

func embedded(t *testing.T) *Client {
	t.Helper()
	c, err := Embedded(quiet(service.Config{}), Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

// remote starts a service on a loopback port and dials it.
func remote(t *testing.T, cfg service.Config, opts Options) (*Client, string) {
	t.Helper()
	srv, err := service.NewServer(quiet(cfg))
	if err != nil {
		t.Fatal(err)
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	go srv.Serve(lis)
	t.Cleanup(srv.Stop)
	c, err := Dial(lis.Addr().String(), opts)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c, lis.Addr().String()
}

// quiet drops the server's call log from test output.
func quiet(cfg service.Config) service.Config {
	cfg.Logger = slog.New(slog.DiscardHandler)
	return cfg
}

func ctxT(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	t.Cleanup(cancel)
	return ctx
}

// stripTiming removes the wall-clock fields, the only ones that may differ
// between two runs of the same request.
func stripTiming(r *pb.RunReport) *pb.RunReport {
	r = proto.Clone(r).(*pb.RunReport)
	r.WallTimeS, r.UserSlotsPerS = 0, 0
	return r
}

func TestSimulateEmbeddedAndRemoteAgree(t *testing.T) {
	sc := tinyScenario(t)
	var progress int
	a, err := embedded(t).Simulate(ctxT(t), &pb.SimulateRequest{Scenario: sc, ProgressIntervalMs: 1}, func(*pb.Progress) { progress++ })
	if err != nil {
		t.Fatal(err)
	}
	rc, _ := remote(t, service.Config{}, Options{})
	b, err := rc.Simulate(ctxT(t), &pb.SimulateRequest{Scenario: sc}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if a.GetAggregate().GetUsers() != 4 {
		t.Errorf("aggregate users = %d, want 4", a.GetAggregate().GetUsers())
	}
	if !proto.Equal(stripTiming(a), stripTiming(b)) {
		t.Error("embedded and remote reports differ for the same seed")
	}
	t.Logf("progress events: %d", progress)
}

func TestInvalidInputKeepsViolations(t *testing.T) {
	sc := tinyScenario(t)
	sc.Groups[0].Count = 0
	sc.InnerLoop.UpdateRateHz = -5
	_, err := embedded(t).Simulate(ctxT(t), &pb.SimulateRequest{Scenario: sc}, nil)
	inv, ok := AsInvalidInput(err)
	if !ok {
		t.Fatalf("error %v (%T) is not an InvalidInputError", err, err)
	}
	fields := map[string]bool{}
	for _, v := range inv.Violations {
		fields[v.Field] = true
		if v.Rule == "" {
			t.Errorf("violation of %s has no rule", v.Field)
		}
	}
	for _, want := range []string{"scenario.groups[0].count", "scenario.inner_loop.update_rate_hz"} {
		if !fields[want] {
			t.Errorf("no violation for %s in %v", want, inv.Violations)
		}
	}
	if st, ok := status.FromError(err); !ok || st.Code() != codes.InvalidArgument {
		t.Errorf("status of the error: %v, want InvalidArgument", st.Code())
	}
}

func TestSweepYieldsEveryPoint(t *testing.T) {
	sc := tinyScenario(t)
	call := embedded(t).Sweep(ctxT(t), &pb.SweepRequest{Base: sc, SeedMode: pb.SeedMode_SEED_MODE_COMMON,
		Axes: []*pb.SweepAxis{{Path: "inner_loop.step_db", Values: []float64{0.5, 1, 2}}}})
	seen := map[int64]bool{}
	for p, err := range call.Points() {
		if err != nil {
			t.Fatal(err)
		}
		seen[p.GetIndex()] = true
	}
	if len(seen) != 3 || !seen[0] || !seen[1] || !seen[2] {
		t.Errorf("points seen %v, want 0, 1, 2", seen)
	}
	if s := call.Summary(); s == nil || s.GetGridPoints() != 3 {
		t.Errorf("summary %v, want 3 grid points", s)
	}
}

func TestSweepBreakStops(t *testing.T) {
	call := embedded(t).Sweep(ctxT(t), &pb.SweepRequest{Base: tinyScenario(t), SeedMode: pb.SeedMode_SEED_MODE_COMMON,
		Axes: []*pb.SweepAxis{{Path: "inner_loop.step_db", Values: []float64{0.5, 1, 1.5, 2}}}})
	n := 0
	for _, err := range call.Points() {
		if err != nil {
			t.Fatal(err)
		}
		n++
		break
	}
	if n != 1 || call.Summary() != nil {
		t.Errorf("after break: %d points, summary %v; want 1 point and no summary", n, call.Summary())
	}
}

// TestStreamGainsChunkingInvariant: the same request gives the same samples
// whatever the chunk size (the API's promise), decoded by DecodeGains.
func TestStreamGainsChunkingInvariant(t *testing.T) {
	c := embedded(t)
	get := func(chunk int32) []complex64 {
		req := &pb.StreamGainsRequest{Channel: &pb.ChannelSpec{DopplerHz: 50, SampleRateHz: 1500, Profile: "EPA",
			Generator: pb.Generator_GENERATOR_DEFAULT}, Links: 2, Samples: 1000, Seed: 3, ChunkSamples: chunk}
		all := make([]complex64, 2*1000*7)
		n := 0
		for ch, err := range c.StreamGains(ctxT(t), req) {
			if err != nil {
				t.Fatal(err)
			}
			for k := range ch.Links {
				for s := range ch.Samples {
					for l := range ch.Taps {
						all[(k*1000+int(ch.SampleOffset)+s)*ch.Taps+l] = ch.At(k, s, l)
						n++
					}
				}
			}
		}
		if n != len(all) {
			t.Fatalf("chunk %d: got %d gains, want %d", chunk, n, len(all))
		}
		return all
	}
	a, b := get(0), get(137)
	for i := range a {
		if a[i] != b[i] {
			t.Fatalf("sample %d differs between chunk sizes: %v vs %v", i, a[i], b[i])
		}
	}
}

func TestDecodeGainsRejectsShortPayload(t *testing.T) {
	if _, err := DecodeGains(&pb.StreamGainsResponse{Links: 1, Samples: 2, Taps: 1, Gains: make([]byte, 8)}); err == nil {
		t.Error("8 bytes for 2 samples accepted")
	}
}

func TestLockstepSession(t *testing.T) {
	c := embedded(t)
	il := tinyScenario(t).GetInnerLoop()
	ol := tinyScenario(t).GetOuterLoop()
	cfg := &pb.LockstepConfig{Seed: 1, Users: []*pb.LockstepUser{{InnerLoop: il, OuterLoop: ol}, {InnerLoop: il, OuterLoop: ol}}}
	s, err := c.Lockstep(ctxT(t), cfg)
	if err != nil {
		t.Fatal(err)
	}
	// A user far below target must be told to go up, one far above to go
	// down (1-bit loop, 1 dB step, no command errors).
	for i := range 3 {
		r, err := s.Step([]float64{-10, 20}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if r.GetSlot() != int64(i) || len(r.GetCommandDb()) != 2 {
			t.Fatalf("slot %d: answer %v", i, r)
		}
		if r.GetCommandDb()[0] <= 0 || r.GetCommandDb()[1] >= 0 {
			t.Errorf("slot %d: commands %v, want up for user 0 and down for user 1", i, r.GetCommandDb())
		}
	}
	if err := s.Close(); err != nil {
		t.Errorf("Close: %v", err)
	}
	// A wrong user count ends the stream with the field named.
	s2, err := c.Lockstep(ctxT(t), cfg)
	if err != nil {
		t.Fatal(err)
	}
	_, err = s2.Step([]float64{1}, nil)
	if _, ok := AsInvalidInput(err); !ok {
		t.Errorf("wrong user count: %v, want an InvalidInputError", err)
	}
	s2.Close()
}

// flakySimulation answers UNAVAILABLE to the first call and a report to
// the next: the client's service config must retry.
type flakySimulation struct {
	pb.UnimplementedSimulationServiceServer
	calls atomic.Int32
}

func (f *flakySimulation) Simulate(_ *pb.SimulateRequest, stream pb.SimulationService_SimulateServer) error {
	if f.calls.Add(1) == 1 {
		return status.Error(codes.Unavailable, "replica going away")
	}
	return stream.Send(&pb.SimulateResponse{Event: &pb.SimulateResponse_Report{Report: &pb.RunReport{Seed: 42}}})
}

func TestRetryOnUnavailable(t *testing.T) {
	gs := grpc.NewServer()
	fake := &flakySimulation{}
	pb.RegisterSimulationServiceServer(gs, fake)
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	go gs.Serve(lis)
	defer gs.Stop()
	c, err := Dial(lis.Addr().String(), Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	rep, err := c.Simulate(ctxT(t), &pb.SimulateRequest{}, nil)
	if err != nil {
		t.Fatalf("Simulate after one UNAVAILABLE: %v", err)
	}
	if rep.GetSeed() != 42 || fake.calls.Load() != 2 {
		t.Errorf("seed %d after %d calls, want 42 after 2", rep.GetSeed(), fake.calls.Load())
	}
	// Without the service config there is no retry.
	fake.calls.Store(0)
	c2, err := Dial(lis.Addr().String(), Options{NoServiceConfig: true})
	if err != nil {
		t.Fatal(err)
	}
	defer c2.Close()
	if _, err := c2.Simulate(ctxT(t), &pb.SimulateRequest{}, nil); !IsUnreachable(err) {
		t.Errorf("no service config: %v, want UNAVAILABLE", err)
	}
}

func TestUnreachableServer(t *testing.T) {
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := lis.Addr().String()
	lis.Close() // nothing listens there now
	c, err := Dial(addr, Options{CallTimeout: 20 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	_, err = c.Simulate(ctxT(t), &pb.SimulateRequest{Scenario: tinyScenario(t)}, nil)
	if !IsUnreachable(err) {
		t.Errorf("got %v, want UNAVAILABLE", err)
	}
}

func TestCallTimeout(t *testing.T) {
	sc := tinyScenario(t)
	sc.Run.Slots = 20_000_000 // far longer than the deadline
	c, err := Embedded(quiet(service.Config{}), Options{CallTimeout: 200 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	// The 20 million slots take minutes; DEADLINE_EXCEEDED means the
	// call ended at its deadline, not at the end of the run (no wall-clock
	// bound: the check holds on a busy machine).
	_, err = c.Simulate(context.Background(), &pb.SimulateRequest{Scenario: sc}, nil)
	if st, _ := status.FromError(err); st.Code() != codes.DeadlineExceeded {
		t.Errorf("got %v, want DEADLINE_EXCEEDED", err)
	}
}

// TestMutualTLS: a server requiring client certificates accepts a client
// with one and turns away a client without (certificates made here).
func TestMutualTLS(t *testing.T) {
	dir := t.TempDir()
	caCert, caKey := newCA(t)
	writePEM(t, filepath.Join(dir, "ca.pem"), "CERTIFICATE", caCert.Raw)
	srvCert := leaf(t, caCert, caKey, "127.0.0.1", true)
	cliDER, cliKey := leafDER(t, caCert, caKey, "client", false)
	writePEM(t, filepath.Join(dir, "client.pem"), "CERTIFICATE", cliDER)
	kb, err := x509.MarshalECPrivateKey(cliKey)
	if err != nil {
		t.Fatal(err)
	}
	writePEM(t, filepath.Join(dir, "client.key"), "EC PRIVATE KEY", kb)
	pool := x509.NewCertPool()
	pool.AddCert(caCert)
	tlsCfg := &tls.Config{Certificates: []tls.Certificate{srvCert}, ClientCAs: pool, ClientAuth: tls.RequireAndVerifyClientCert, MinVersion: tls.VersionTLS12}

	ok, _ := remote(t, service.Config{TLS: tlsCfg}, Options{TLS: TLSOptions{CAFile: filepath.Join(dir, "ca.pem"),
		CertFile: filepath.Join(dir, "client.pem"), KeyFile: filepath.Join(dir, "client.key")}})
	if st, err := ok.Health(ctxT(t)); err != nil || st != "SERVING" {
		t.Errorf("mutual TLS with a client certificate: %q, %v", st, err)
	}
	_, addr := remote(t, service.Config{TLS: tlsCfg}, Options{})
	bad, err := Dial(addr, Options{TLS: TLSOptions{CAFile: filepath.Join(dir, "ca.pem")}})
	if err != nil {
		t.Fatal(err)
	}
	defer bad.Close()
	if _, err := bad.Health(ctxT(t)); !IsUnreachable(err) {
		t.Errorf("no client certificate: %v, want UNAVAILABLE", err)
	}
	if _, err := (TLSOptions{CertFile: "x.pem"}).Config(); err == nil {
		t.Error("a certificate without its key was accepted")
	}
}

func newCA(t *testing.T) (*x509.Certificate, *ecdsa.PrivateKey) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "fadeloop test CA"},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour), IsCA: true,
		KeyUsage: x509.KeyUsageCertSign, BasicConstraintsValid: true}
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

func leafDER(t *testing.T, ca *x509.Certificate, caKey *ecdsa.PrivateKey, name string, server bool) ([]byte, *ecdsa.PrivateKey) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{SerialNumber: big.NewInt(time.Now().UnixNano()), Subject: pkix.Name{CommonName: name},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour), KeyUsage: x509.KeyUsageDigitalSignature}
	if server {
		tmpl.ExtKeyUsage = []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}
		tmpl.IPAddresses = []net.IP{net.ParseIP(name)}
	} else {
		tmpl.ExtKeyUsage = []x509.ExtKeyUsage{x509.ExtKeyUsageClientAuth}
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, ca, &key.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	return der, key
}

func leaf(t *testing.T, ca *x509.Certificate, caKey *ecdsa.PrivateKey, name string, server bool) tls.Certificate {
	der, key := leafDER(t, ca, caKey, name, server)
	return tls.Certificate{Certificate: [][]byte{der}, PrivateKey: key}
}

func writePEM(t *testing.T, path, typ string, der []byte) {
	t.Helper()
	if err := os.WriteFile(path, pem.EncodeToMemory(&pem.Block{Type: typ, Bytes: der}), 0o600); err != nil {
		t.Fatal(err)
	}
}
