package service

// Attacks and faults replayed against a live server (bufconn and loopback).
// Each test bounds its effect by work or by counts (run slots, streams,
// goroutines, samples generated), never by wall-clock time: the time-outs
// below are only guards against a hung test and are generous enough for a
// busy 2-core machine.

import (
	"context"
	"encoding/json"
	"errors"
	"io"
	"log/slog"
	"runtime"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/metadata"
	reflectionpb "google.golang.org/grpc/reflection/grpc_reflection_v1"
	"google.golang.org/grpc/status"

	"github.com/fadeloop/fadeloop/fading"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// guard is the longest any wait below may take before the test fails as
// hung. It is not a performance bound.
const guard = 60 * time.Second

// eventually polls cond until it holds or guard passes.
func eventually(t *testing.T, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(guard)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("%s: not reached within the %v guard", what, guard)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// slotsFree reports whether the server has no run in progress.
func slotsFree(env *testEnv) bool { return len(env.srv.runs.slots) == 0 }

// logLines returns the decoded JSON log lines whose method ends in method.
func logLines(t *testing.T, env *testEnv, method string) []map[string]any {
	t.Helper()
	var out []map[string]any
	for _, line := range strings.Split(env.logs.String(), "\n") {
		if line == "" {
			continue
		}
		var m map[string]any
		if err := json.Unmarshal([]byte(line), &m); err != nil {
			t.Fatalf("log line is not JSON: %q", line)
		}
		if s, _ := m["method"].(string); strings.HasSuffix(s, method) {
			out = append(out, m)
		}
	}
	return out
}

// noErrorLines fails if the log holds a line at level ERROR.
func noErrorLines(t *testing.T, env *testEnv) {
	t.Helper()
	for _, line := range strings.Split(env.logs.String(), "\n") {
		if strings.Contains(line, `"level":"ERROR"`) {
			t.Errorf("ERROR log line: %s", line)
		}
	}
}

// Attack: StreamGains clients that never read held both run slots 40 s past
// a 10 s call cap. Now the idle timeout or the call cap ends the stream and
// frees the slot, and the generator stops: the samples generated after the
// cut are bounded by flow control and the three chunk buffers, not by time.
func TestStreamGainsNonReaderIsCut(t *testing.T) {
	cases := []struct {
		name string
		cfg  Config
		want string
	}{
		{"idle timeout", Config{StreamIdleTimeout: 200 * time.Millisecond}, "stream_idle_timeout"},
		// The cap is long enough for the generator to fill the flow-control
		// window first, so that the handler is blocked in Send when the cap
		// passes (the case that held both slots before).
		{"call cap", Config{MaxCallDuration: 3 * time.Second}, "max_call_duration"},
	}
	for _, tr := range transports {
		for _, c := range cases {
			t.Run(string(tr)+"/"+c.name, func(t *testing.T) {
				cfg := c.cfg
				cfg.MaxConcurrentRuns, cfg.QueueLength = 2, -1
				cfg.abortGrace = 50 * time.Millisecond
				env := startEnv(t, tr, cfg)
				var streams []pb.ChannelService_StreamGainsClient
				for range 2 { // both run slots
					st, err := env.channel.StreamGains(context.Background(),
						&pb.StreamGainsRequest{Channel: eva(55.6), Links: 64, Samples: 2e7})
					if err != nil {
						t.Fatal(err)
					}
					streams = append(streams, st)
				}
				eventually(t, "both run slots taken", func() bool { return len(env.srv.runs.slots) == 2 })
				eventually(t, "run slots freed", func() bool { return slotsFree(env) })
				filled := env.srv.gainsFilled.Load()
				for _, st := range streams {
					_, err := drain(st.Recv)
					s := wantCode(t, err, codes.DeadlineExceeded)
					if !strings.Contains(s.Message(), c.want) {
						t.Errorf("message %q does not name %s", s.Message(), c.want)
					}
				}
				// Generation stopped with the stream: per stream at most the
				// flow-control window (4 MiB) plus three buffers of 512 KiB
				// was ever produced (the client read nothing).
				perSample := int64(8 * 64 * 9) // links × EVA taps × 8 bytes
				bound := 2 * ((4<<20)/perSample + 4*((512<<10)/perSample+1))
				if filled > bound {
					t.Errorf("%d samples per link generated for clients that read nothing, want <= %d", filled, bound)
				}
				if after := env.srv.gainsFilled.Load(); after != filled {
					t.Errorf("generation went on after the slots were freed: %d -> %d", filled, after)
				}
				// A normal call is served at once.
				if err := callGains(context.Background(), env.channel, smallGains()); err != nil {
					t.Fatalf("call after the cut: %v", err)
				}
				noErrorLines(t, env)
			})
		}
	}
}

// Attack: idle Lockstep streams outlived the cap and 256 of them locked out
// every other Lockstep caller. Now an idle stream is cut after
// StreamIdleTimeout and frees its place.
func TestLockstepIdleStreamIsCut(t *testing.T) {
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{MaxLockstepStreams: 1, StreamIdleTimeout: 200 * time.Millisecond, abortGrace: 50 * time.Millisecond})
			st, err := env.loop.Lockstep(context.Background())
			if err != nil {
				t.Fatal(err)
			}
			if err := st.Send(lockstepConfig(1)); err != nil {
				t.Fatal(err)
			}
			// The client now sends nothing more.
			_, err = st.Recv()
			s := wantCode(t, err, codes.DeadlineExceeded)
			if !strings.Contains(s.Message(), "stream_idle_timeout") {
				t.Errorf("message %q", s.Message())
			}
			eventually(t, "Lockstep place freed", func() bool { return env.srv.lockstep.n.Load() == 0 })
			// The freed place serves a well-behaved client.
			if err := runLockstep(t, env, lockstepConfig(1), slotMsg(0, 3)); err != nil {
				t.Fatalf("Lockstep after the cut: %v", err)
			}
		})
	}
}

// Attack: one client opens Lockstep streams until the server's limit. Now
// it gets its share (MaxLockstepStreamsPerClient) and no more.
func TestLockstepPerClientShare(t *testing.T) {
	env := startEnv(t, viaLoopback, Config{MaxLockstepStreams: 8, MaxLockstepStreamsPerClient: 2})
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	for i := range 2 {
		st, err := env.loop.Lockstep(ctx)
		if err != nil {
			t.Fatal(err)
		}
		if err := st.Send(lockstepConfig(1)); err != nil {
			t.Fatal(err)
		}
		if err := st.Send(slotMsg(0, 3)); err != nil {
			t.Fatal(err)
		}
		if _, err := st.Recv(); err != nil {
			t.Fatalf("stream %d: %v", i, err)
		}
	}
	err := runLockstep(t, env, lockstepConfig(1))
	s := wantCode(t, err, codes.ResourceExhausted)
	if !strings.Contains(s.Message(), "max_lockstep_streams_per_client") {
		t.Errorf("message %q", s.Message())
	}
	if got := env.srv.lockstep.n.Load(); got != 2 {
		t.Errorf("%d Lockstep places held, want 2", got)
	}
}

// Fault: one idle Lockstep client delayed every shutdown by the whole drain
// timeout. Now the drain ends Lockstep streams with UNAVAILABLE and
// Shutdown finishes before its context (one minute) runs out.
func TestShutdownEndsIdleLockstep(t *testing.T) {
	env := startEnv(t, viaLoopback, Config{abortGrace: 50 * time.Millisecond})
	st, err := env.loop.Lockstep(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if err := st.Send(lockstepConfig(1)); err != nil {
		t.Fatal(err)
	}
	eventually(t, "Lockstep stream open", func() bool { return env.srv.lockstep.n.Load() == 1 })
	ctx, cancel := context.WithTimeout(context.Background(), guard)
	defer cancel()
	if err := env.srv.Shutdown(ctx); err != nil {
		t.Fatalf("Shutdown: %v (an idle Lockstep stream held it to the drain timeout)", err)
	}
	_, err = st.Recv()
	wantCode(t, err, codes.Unavailable)
}

// Attack: 20 000 health Watch streams on one connection made 40 013
// goroutines and 355 MB. Now at most MaxHealthWatchers are open; the rest
// get RESOURCE_EXHAUSTED, and server goroutines stay bounded.
func TestHealthWatchBound(t *testing.T) {
	const limit, attempts = 16, 400
	env := startEnv(t, viaLoopback, Config{MaxHealthWatchers: limit})
	hc := healthpb.NewHealthClient(env.conn)
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	before := runtime.NumGoroutine()
	var mu sync.Mutex
	codesSeen := map[codes.Code]int{}
	var wg sync.WaitGroup
	for range attempts {
		wg.Add(1)
		go func() {
			defer wg.Done()
			w, err := hc.Watch(ctx, &healthpb.HealthCheckRequest{})
			if err == nil {
				_, err = w.Recv()
			}
			mu.Lock()
			codesSeen[status.Code(err)]++
			mu.Unlock()
		}()
	}
	wg.Wait()
	if codesSeen[codes.OK] != limit || codesSeen[codes.ResourceExhausted] != attempts-limit {
		t.Fatalf("codes %v, want %d OK and %d ResourceExhausted", codesSeen, limit, attempts-limit)
	}
	if got := env.srv.lockstep.n.Load(); got != 0 {
		t.Fatalf("unexpected Lockstep places %d", got)
	}
	// Each open watcher costs a few goroutines on each side (client and
	// server share this process); refused ones cost none once ended.
	eventually(t, "refused Watch streams release their goroutines", func() bool {
		return runtime.NumGoroutine()-before <= 8*limit+32
	})
}

// Attack: many concurrent calls on one connection. The server advertises
// MaxStreamsPerConnection; further calls wait in the client (here until
// their deadline), while another connection is served.
func TestMaxStreamsPerConnection(t *testing.T) {
	env := startEnv(t, viaLoopback, Config{MaxStreamsPerConnection: 2})
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	for range 2 {
		st, err := env.loop.Lockstep(ctx)
		if err != nil {
			t.Fatal(err)
		}
		if err := st.Send(lockstepConfig(1)); err != nil {
			t.Fatal(err)
		}
	}
	eventually(t, "two streams open", func() bool { return env.srv.lockstep.n.Load() == 2 })
	short, cancelShort := context.WithTimeout(ctx, 300*time.Millisecond)
	defer cancelShort()
	err := callGains(short, env.channel, smallGains())
	wantCode(t, err, codes.DeadlineExceeded)
	if got := env.srv.lockstep.n.Load(); got != 2 {
		t.Errorf("%d Lockstep streams, want 2", got)
	}
	conn2, err := grpc.NewClient(env.conn.Target(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn2.Close()
	if err := callGains(ctx, pb.NewChannelServiceClient(conn2), smallGains()); err != nil {
		t.Fatalf("second connection: %v", err)
	}
}

// rawCodec sends and receives raw bytes, to put undecodable input on the
// wire.
type rawCodec struct{}

func (rawCodec) Marshal(v any) ([]byte, error) { return v.([]byte), nil }
func (rawCodec) Unmarshal(b []byte, v any) error {
	*(v.(*[]byte)) = append([]byte(nil), b...)
	return nil
}
func (rawCodec) Name() string { return "proto" }

// Fault: undecodable request bytes got INTERNAL and an ERROR log line. Now
// they get INVALID_ARGUMENT, logged at INFO, for unary and streaming calls.
func TestUndecodableRequestIsInvalidArgument(t *testing.T) {
	// Field 1, wire type 2 (length-delimited), length 100, no bytes follow:
	// truncated protobuf (protobuf encoding spec, "Length-Delimited
	// Records").
	garbage := []byte{0x0a, 0x64, 0x01}
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{})
			var out []byte
			err := env.conn.Invoke(context.Background(), "/fadeloop.v1.ChannelService/CheckChannel", garbage, &out, grpc.ForceCodec(rawCodec{}))
			wantCode(t, err, codes.InvalidArgument)

			desc := &grpc.StreamDesc{StreamName: "Lockstep", ServerStreams: true, ClientStreams: true}
			cs, err := env.conn.NewStream(context.Background(), desc, "/fadeloop.v1.LoopService/Lockstep", grpc.ForceCodec(rawCodec{}))
			if err != nil {
				t.Fatal(err)
			}
			if err := cs.SendMsg(garbage); err != nil && !errors.Is(err, io.EOF) {
				t.Fatal(err)
			}
			_ = cs.CloseSend()
			err = cs.RecvMsg(&out)
			wantCode(t, err, codes.InvalidArgument)

			st, err := env.channel.StreamGains(context.Background(), smallGains())
			if err != nil {
				t.Fatal(err)
			}
			if _, err := drain(st.Recv); err != nil {
				t.Fatalf("a valid call after garbage: %v", err)
			}
			eventually(t, "both calls logged", func() bool {
				return len(logLines(t, env, "/CheckChannel")) == 1 && len(logLines(t, env, "/Lockstep")) == 1
			})
			noErrorLines(t, env)
			decodeErrors.Range(func(k, _ any) bool {
				t.Errorf("decode error of %T left behind", k)
				return true
			})
		})
	}
}

// Fault: clients that cancel, time out or disconnect were logged at ERROR.
// Now such endings are below ERROR whatever code they end with.
func TestClientEndingsLoggedBelowError(t *testing.T) {
	env := startEnv(t, viaLoopback, Config{})
	big := &pb.StreamGainsRequest{Channel: eva(55.6), Links: 64, Samples: 2e7}

	ctx, cancel := context.WithCancel(context.Background())
	st, err := env.channel.StreamGains(ctx, big)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := st.Recv(); err != nil {
		t.Fatal(err)
	}
	cancel()

	dctx, dcancel := context.WithTimeout(context.Background(), 200*time.Millisecond)
	defer dcancel()
	st2, err := env.channel.StreamGains(dctx, big)
	if err != nil {
		t.Fatal(err)
	}
	_, _ = drain(st2.Recv)

	conn2, err := grpc.NewClient(env.conn.Target(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	st3, err := pb.NewChannelServiceClient(conn2).StreamGains(context.Background(), big)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := st3.Recv(); err != nil {
		t.Fatal(err)
	}
	conn2.Close() // disconnect mid-stream

	eventually(t, "three calls logged", func() bool { return len(logLines(t, env, "/StreamGains")) == 3 })
	for _, l := range logLines(t, env, "/StreamGains") {
		if l["level"] == "ERROR" {
			t.Errorf("client ending logged at ERROR: %v", l)
		}
		if l["code"] == "OK" {
			t.Errorf("call logged OK: %v", l)
		}
	}
	eventually(t, "run slots freed", func() bool { return slotsFree(env) })
}

// Fault: a panic in a StreamGains worker goroutine would kill the server.
// Now it reaches the producer, whose goroutine turns it into INTERNAL.
func TestFillGainsWorkerPanicRecovered(t *testing.T) {
	cfg, err := fading.NewChannel(fading.ChannelConfig{DopplerHz: 10, SampleRateHz: 1500,
		Profile: mustProfile(t, "EPA"), Generator: fading.GeneratorDefault}, 1, 0)
	if err != nil {
		t.Fatal(err)
	}
	chans := []*fading.Channel{cfg, nil} // a nil channel panics in its worker
	taps := 7
	dst := make([]complex64, 2*4*taps)
	var logs syncBuffer
	l := slog.New(slog.NewJSONHandler(&logs, nil))
	err = <-goSafe(l, context.Background(), func() error {
		fillGains(chans, dst, 4, taps, 2)
		return nil
	})
	s := wantCode(t, err, codes.Internal)
	if !strings.Contains(s.Message(), "worker goroutine") {
		t.Errorf("message %q", s.Message())
	}
	if !strings.Contains(logs.String(), "panic in worker") {
		t.Errorf("panic not logged: %s", logs.String())
	}
}

func mustProfile(t *testing.T, name string) fading.Profile {
	t.Helper()
	p, err := fading.BuiltinProfile(name)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// bearer is per-RPC credentials for the token tests.
type bearer string

func (b bearer) GetRequestMetadata(context.Context, ...string) (map[string]string, error) {
	return map[string]string{"authorization": "Bearer " + string(b)}, nil
}
func (bearer) RequireTransportSecurity() bool { return false }

func TestBearerToken(t *testing.T) {
	const token = "k2-fadeloop-test-token"
	env := startEnv(t, viaBufconn, Config{AuthToken: token})
	for _, c := range []struct {
		name string
		md   []string
		want codes.Code
	}{
		{"none", nil, codes.Unauthenticated},
		{"wrong", []string{"authorization", "Bearer nope"}, codes.Unauthenticated},
		{"not bearer", []string{"authorization", "Basic " + token}, codes.Unauthenticated},
		{"right", []string{"authorization", "Bearer " + token}, codes.OK},
		{"right, lower-case scheme", []string{"authorization", "bearer " + token}, codes.OK},
	} {
		t.Run(c.name, func(t *testing.T) {
			ctx := context.Background()
			if c.md != nil {
				ctx = metadata.AppendToOutgoingContext(ctx, c.md...)
			}
			if got := status.Code(callGains(ctx, env.channel, smallGains())); got != c.want {
				t.Errorf("StreamGains: %v, want %v", got, c.want)
			}
			sim, err := env.sim.Simulate(ctx, &pb.SimulateRequest{})
			if err == nil {
				_, err = drain(sim.Recv)
			}
			if c.want == codes.Unauthenticated {
				wantCode(t, err, codes.Unauthenticated)
			}
		})
	}
	// Health is exempt: load balancers probe without credentials.
	if _, err := healthpb.NewHealthClient(env.conn).Check(context.Background(), &healthpb.HealthCheckRequest{}); err != nil {
		t.Errorf("health without a token: %v", err)
	}
	// Per-RPC credentials on the connection work too.
	env2 := startEnv(t, viaBufconn, Config{AuthToken: token},
		grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer(token)))
	if err := callGains(context.Background(), env2.channel, smallGains()); err != nil {
		t.Errorf("with per-RPC credentials: %v", err)
	}
	if strings.Contains(env.logs.String(), token) {
		t.Error("the token appears in the log")
	}
}

func TestReflectionCanBeTurnedOff(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{DisableReflection: true})
	rc := reflectionpb.NewServerReflectionClient(env.conn)
	st, err := rc.ServerReflectionInfo(context.Background())
	if err == nil {
		_ = st.Send(&reflectionpb.ServerReflectionRequest{MessageRequest: &reflectionpb.ServerReflectionRequest_ListServices{}})
		_, err = st.Recv()
	}
	wantCode(t, err, codes.Unimplemented)
	if _, ok := env.srv.GRPC().GetServiceInfo()["grpc.reflection.v1.ServerReflection"]; ok {
		t.Error("reflection registered")
	}
}

// Attack: a Lockstep client that keeps sending slots but never reads the
// replies blocks the server in Send once flow control is exhausted. The
// idle timeout covers Send too, so the stream is cut and its place freed.
func TestLockstepNonReaderIsCut(t *testing.T) {
	env := startEnv(t, viaLoopback, Config{MaxLockstepStreams: 1, StreamIdleTimeout: 300 * time.Millisecond, abortGrace: 50 * time.Millisecond})
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	st, err := env.loop.Lockstep(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if err := st.Send(lockstepConfig(1)); err != nil {
		t.Fatal(err)
	}
	eventually(t, "Lockstep stream open", func() bool { return env.srv.lockstep.n.Load() == 1 })
	// Send slots without reading (bounded by count). Once the server has
	// cut the stream its trailers wait behind replies the client does not
	// read, so the client may block in Send: that is the client's own
	// stall; the server has released the stream. Cancelling the client's
	// context ends the sender.
	const maxSlots = 2_000_000
	var sent atomic.Int64
	senderDone := make(chan struct{})
	go func() {
		defer close(senderDone)
		for i := int64(0); i < maxSlots; i++ {
			if st.Send(slotMsg(i, 3)) != nil {
				return
			}
			sent.Store(i + 1)
		}
	}()
	eventually(t, "Lockstep place freed", func() bool { return env.srv.lockstep.n.Load() == 0 })
	cancel()
	<-senderDone
	t.Logf("client sent %d slots without reading before the cut", sent.Load())
	if err := runLockstep(t, env, lockstepConfig(1), slotMsg(0, 3)); err != nil {
		t.Fatalf("Lockstep after the cut: %v", err)
	}
}
