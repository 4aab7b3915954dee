package service

import (
	"context"
	"errors"
	"io"
	"net"
	"slices"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/test/bufconn"
	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// BenchmarkStreamGains streams the complex tap gains of 64 three-tap links
// (30 km/h at 2 GHz, 1500 Hz) end to end over a real 127.0.0.1 TCP
// connection to a Go client, and reports complex samples per second
// received by the client (target >= 40e6).
func BenchmarkStreamGains(b *testing.B) {
	env := startEnv(b, viaLoopback, Config{MaxCost: 1e12})
	const links, samples = 64, 1 << 16
	req := &pb.StreamGainsRequest{
		Channel: &pb.ChannelSpec{DopplerHz: 55.6, SampleRateHz: 1500, Generator: pb.Generator_GENERATOR_DEFAULT,
			CustomTaps: []*pb.Tap{{DelayNs: 0}, {DelayNs: 100}, {DelayNs: 200}}},
		Links: links, Samples: samples, Seed: 1,
	}
	b.ReportAllocs()
	b.ResetTimer()
	var got int64
	for b.Loop() {
		st, err := env.channel.StreamGains(context.Background(), req)
		if err != nil {
			b.Fatal(err)
		}
		for {
			m, err := st.Recv()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				b.Fatal(err)
			}
			got += int64(len(m.GetGains()) / 8)
		}
	}
	b.ReportMetric(float64(got)/b.Elapsed().Seconds(), "complex-samples/s")
	b.ReportMetric(float64(got*8)/b.Elapsed().Seconds()/1e6, "MB/s")
}

// BenchmarkSimulateOverhead runs the canonical scenario (64 users, 90 000
// slots) directly with loop.Run and through Simulate over a real loopback
// connection, alternating the two in each iteration so that both see the
// same machine load, and reports each one's user-slots/s and the service's
// overhead in percent (target <= 5 %).
func BenchmarkSimulateOverhead(b *testing.B) {
	env := startEnv(b, viaLoopback, Config{})
	sc := loop.CanonicalScenario()
	req := &pb.SimulateRequest{Scenario: ScenarioToProto(sc)}
	var direct, served time.Duration
	var slots int64
	b.ReportAllocs()
	for b.Loop() {
		t0 := time.Now()
		rep, err := loop.Run(context.Background(), sc, loop.RunOptions{})
		if err != nil {
			b.Fatal(err)
		}
		direct += time.Since(t0)
		t1 := time.Now()
		_, srep, err := simulate(context.Background(), env, req)
		if err != nil {
			b.Fatal(err)
		}
		served += time.Since(t1)
		if srep.GetSimulatedUserSlots() != rep.SimulatedUserSlots {
			b.Fatalf("service simulated %d user-slots, engine %d", srep.GetSimulatedUserSlots(), rep.SimulatedUserSlots)
		}
		slots += rep.SimulatedUserSlots
	}
	d, s := float64(slots)/direct.Seconds(), float64(slots)/served.Seconds()
	b.ReportMetric(d, "direct-user-slots/s")
	b.ReportMetric(s, "service-user-slots/s")
	b.ReportMetric(100*(d-s)/d, "overhead-%")
}

// lockstep64Bench is one client's side of the Lockstep benchmarks: 64
// users, each round trip sends one slot's 64 SIRs (with a block result for
// every user every 15th slot) and waits for the reply of 64 values per
// field. The request and response messages are reused.
type lockstep64Bench struct {
	st     grpc.ClientStream
	slot   *pb.LockstepSlot
	blocks []*pb.BlockResult
	req    *pb.LockstepRequest
	resp   *pb.LockstepResponse
	n      int64
}

func newLockstep64Bench(st grpc.ClientStream) *lockstep64Bench {
	lb := &lockstep64Bench{st: st, slot: &pb.LockstepSlot{SirDb: make([]float64, 64)}, resp: &pb.LockstepResponse{}}
	lb.blocks = make([]*pb.BlockResult, 64)
	for u := range lb.blocks {
		lb.blocks[u] = &pb.BlockResult{User: int32(u), Error: u%10 == 0}
	}
	lb.req = &pb.LockstepRequest{Message: &pb.LockstepRequest_Slot{Slot: lb.slot}}
	return lb
}

// fill sets the request to slot n's.
func (lb *lockstep64Bench) fill(n int64) {
	lb.slot.Slot = n
	for u := range lb.slot.SirDb {
		lb.slot.SirDb[u] = 5 + float64((n+int64(u))%7) - 3
	}
	lb.slot.Blocks = nil
	if n%15 == 14 {
		lb.slot.Blocks = lb.blocks
	}
}

// roundTrip sends the next slot and receives its reply.
func (lb *lockstep64Bench) roundTrip(b testing.TB) {
	n := lb.n
	lb.fill(n)
	if err := lb.st.SendMsg(lb.req); err != nil {
		b.Fatal(err)
	}
	if err := lb.st.RecvMsg(lb.resp); err != nil {
		b.Fatal(err)
	}
	if lb.resp.GetSlot() != n || len(lb.resp.GetTxPowerDbm()) != 64 {
		b.Fatalf("reply for slot %d with %d powers, want slot %d with 64", lb.resp.GetSlot(), len(lb.resp.GetTxPowerDbm()), n)
	}
	lb.n++
}

// startLockstep64 opens a Lockstep stream on env and configures 64 users.
func startLockstep64(b testing.TB, env *testEnv) *lockstep64Bench {
	st, err := env.loop.Lockstep(context.Background())
	if err != nil {
		b.Fatal(err)
	}
	cfg := &pb.LockstepConfig{Seed: 1, Receiver: &pb.Receiver{SirEstimationErrorDb: 1}}
	for range 64 {
		cfg.Users = append(cfg.Users, lockstepUser(1, 1))
	}
	if err := st.Send(&pb.LockstepRequest{Message: &pb.LockstepRequest_Config{Config: cfg}}); err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { _ = st.CloseSend() })
	return newLockstep64Bench(st)
}

// BenchmarkLockstep64 runs Lockstep with 64 users over a real loopback
// connection from a Go client (see lockstep64Bench) and reports slot round
// trips per second (target >= 90 % of BenchmarkLockstep64EchoBaseline in
// the same run; BenchmarkLockstep64VsEcho measures the ratio directly).
func BenchmarkLockstep64(b *testing.B) {
	lb := startLockstep64(b, startEnv(b, viaLoopback, Config{}))
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		lb.roundTrip(b)
	}
	b.ReportMetric(float64(lb.n)/b.Elapsed().Seconds(), "slot-round-trips/s")
}

// echoDesc is a bare bidirectional stream that answers each LockstepRequest
// with a LockstepResponse of 64 values per field without any work: the
// transport's own ceiling for BenchmarkLockstep64. Its server has the
// service's codec and transport settings (transportOptions) and no
// interceptors; its client dials like the Lockstep benchmark's.
var echoDesc = grpc.ServiceDesc{
	ServiceName: "fadeloopbench.Echo",
	HandlerType: (*any)(nil),
	Streams: []grpc.StreamDesc{{
		StreamName:    "Echo",
		ServerStreams: true,
		ClientStreams: true,
		Handler: func(_ any, st grpc.ServerStream) error {
			req := &pb.LockstepRequest{}
			resp := &pb.LockstepResponse{CommandDb: make([]float64, 64), TxPowerDbm: make([]float64, 64), TargetDb: make([]float64, 64)}
			for {
				if err := st.RecvMsg(req); err != nil {
					return nil
				}
				if err := takeDecodeError(req); err != nil {
					return err
				}
				resp.Slot = req.GetSlot().GetSlot()
				if err := st.SendMsg(resp); err != nil {
					return err
				}
			}
		},
	}},
}

// startEcho64 serves echoDesc over transport tr and opens its stream.
func startEcho64(b testing.TB, tr transport) *lockstep64Bench {
	cfg, err := Config{}.withDefaults()
	if err != nil {
		b.Fatal(err)
	}
	srv := grpc.NewServer(transportOptions(cfg)...)
	srv.RegisterService(&echoDesc, nil)
	// The dial options of startEnv.
	opts := []grpc.DialOption{
		grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(64 << 20)),
		grpc.WithInitialWindowSize(4 << 20),
		grpc.WithInitialConnWindowSize(8 << 20),
		grpc.WithTransportCredentials(insecure.NewCredentials()),
	}
	var lis net.Listener
	target := "passthrough:///bufnet"
	if tr == viaBufconn {
		bl := bufconn.Listen(4 << 20)
		lis = bl
		opts = append(opts, grpc.WithContextDialer(func(ctx context.Context, _ string) (net.Conn, error) {
			return bl.DialContext(ctx)
		}))
	} else {
		if lis, err = net.Listen("tcp", "127.0.0.1:0"); err != nil {
			b.Fatal(err)
		}
		target = lis.Addr().String()
	}
	go srv.Serve(lis)
	b.Cleanup(srv.Stop)
	conn, err := grpc.NewClient(target, opts...)
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { conn.Close() })
	st, err := conn.NewStream(context.Background(), &echoDesc.Streams[0], "/fadeloopbench.Echo/Echo")
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { _ = st.CloseSend() })
	return newLockstep64Bench(st)
}

func BenchmarkLockstep64EchoBaseline(b *testing.B) {
	lb := startEcho64(b, viaLoopback)
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		lb.roundTrip(b)
	}
	b.ReportMetric(float64(lb.n)/b.Elapsed().Seconds(), "slot-round-trips/s")
}

// BenchmarkLockstep64VsEcho alternates batches of Lockstep and echo round
// trips (as in BenchmarkLockstep64 and BenchmarkLockstep64EchoBaseline),
// in ABBA order, so that both see the same machine load. It reports each
// one's overall rate and Lockstep's rate in percent of the echo's: the
// median over batch pairs (robust to load bursts on a shared machine;
// target >= 90) and the ratio of the overall rates.
func BenchmarkLockstep64VsEcho(b *testing.B) {
	ls := startLockstep64(b, startEnv(b, viaLoopback, Config{}))
	echo := startEcho64(b, viaLoopback)
	const batch = 50
	var tl, te time.Duration
	var ratios []float64
	timeBatch := func(lb *lockstep64Bench) time.Duration {
		t0 := time.Now()
		for range batch {
			lb.roundTrip(b)
		}
		return time.Since(t0)
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; b.Loop(); i++ {
		var dl, de time.Duration
		if i%2 == 0 {
			dl = timeBatch(ls)
			de = timeBatch(echo)
		} else {
			de = timeBatch(echo)
			dl = timeBatch(ls)
		}
		tl += dl
		te += de
		ratios = append(ratios, de.Seconds()/dl.Seconds())
	}
	slices.Sort(ratios)
	rl, re := float64(ls.n)/tl.Seconds(), float64(echo.n)/te.Seconds()
	b.ReportMetric(rl, "lockstep-round-trips/s")
	b.ReportMetric(re, "echo-round-trips/s")
	b.ReportMetric(100*ratios[len(ratios)/2], "lockstep-%-of-echo-median")
	b.ReportMetric(100*rl/re, "lockstep-%-of-echo-overall")
}

// BenchmarkLockstepSlotCore is the handler's per-slot work without the
// transport: decoding a 64-user slot message into the stream's inbox,
// checkSlot and step (a block result for every user every 15th slot, as
// in BenchmarkLockstep64).
func BenchmarkLockstepSlotCore(b *testing.B) {
	srv, err := NewServer(Config{})
	if err != nil {
		b.Fatal(err)
	}
	cfg := &pb.LockstepConfig{Seed: 1, Receiver: &pb.Receiver{SirEstimationErrorDb: 1}}
	for range 64 {
		cfg.Users = append(cfg.Users, lockstepUser(1, 1))
	}
	sess, vs := srv.newLockstepSession(&pb.LockstepRequest{Message: &pb.LockstepRequest_Config{Config: cfg}})
	if len(vs) > 0 {
		b.Fatal(vs)
	}
	lb := newLockstep64Bench(nil)
	const period = 15 * 7 // block and SIR patterns repeat
	var msgs [period][]byte
	in := newSlotInbox()
	b.ReportAllocs()
	for b.Loop() {
		k := sess.next % period
		if msgs[k] == nil {
			lb.fill(sess.next)
			m, err := proto.Marshal(lb.req)
			if err != nil {
				b.Fatal(err)
			}
			msgs[k] = m
		}
		m := msgs[k]
		in.prepare()
		if err := in.decode(m); err != nil {
			b.Fatal(err)
		}
		slot := in.message().GetSlot()
		slot.Slot = sess.next // the cached message's slot index is an earlier one
		if vs := srv.checkSlot(sess, slot); len(vs) > 0 {
			b.Fatal(vs)
		}
		sess.step(slot)
	}
}
