package service

import (
	"context"
	"errors"
	"io"
	"net"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"

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

// BenchmarkLockstep64 runs Lockstep with 64 users over a real loopback
// connection from a Go client: each iteration sends one slot's 64 SIRs
// (with a block result for every user every 15th slot) and waits for the
// reply, and the benchmark reports slot round trips per second (target
// >= 30 000).
func BenchmarkLockstep64(b *testing.B) {
	env := startEnv(b, viaLoopback, Config{})
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
	slot := &pb.LockstepSlot{SirDb: make([]float64, 64)}
	blocks := make([]*pb.BlockResult, 64)
	for u := range blocks {
		blocks[u] = &pb.BlockResult{User: int32(u), Error: u%10 == 0}
	}
	req := &pb.LockstepRequest{Message: &pb.LockstepRequest_Slot{Slot: slot}}
	resp := &pb.LockstepResponse{}
	var n int64
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		slot.Slot = n
		for u := range slot.SirDb {
			slot.SirDb[u] = 5 + float64((n+int64(u))%7) - 3
		}
		slot.Blocks = nil
		if n%15 == 14 {
			slot.Blocks = blocks
		}
		if err := st.Send(req); err != nil {
			b.Fatal(err)
		}
		if err := st.RecvMsg(resp); err != nil {
			b.Fatal(err)
		}
		if resp.GetSlot() != n || len(resp.GetTxPowerDbm()) != 64 {
			b.Fatalf("reply for slot %d with %d powers", resp.GetSlot(), len(resp.GetTxPowerDbm()))
		}
		n++
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "slot-round-trips/s")
	_ = st.CloseSend()
}

// echoDesc is a bare bidirectional stream that answers each LockstepRequest
// with a LockstepResponse of 64 values per field without any work: the
// transport's own ceiling for BenchmarkLockstep64, measured in the same run.
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
				resp.Slot = req.GetSlot().GetSlot()
				if err := st.SendMsg(resp); err != nil {
					return err
				}
			}
		},
	}},
}

func BenchmarkLockstep64EchoBaseline(b *testing.B) {
	srv := grpc.NewServer()
	srv.RegisterService(&echoDesc, nil)
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		b.Fatal(err)
	}
	go srv.Serve(lis)
	defer srv.Stop()
	conn, err := grpc.NewClient(lis.Addr().String(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		b.Fatal(err)
	}
	defer conn.Close()
	st, err := conn.NewStream(context.Background(), &echoDesc.Streams[0], "/fadeloopbench.Echo/Echo")
	if err != nil {
		b.Fatal(err)
	}
	slot := &pb.LockstepSlot{SirDb: make([]float64, 64)}
	req := &pb.LockstepRequest{Message: &pb.LockstepRequest_Slot{Slot: slot}}
	resp := &pb.LockstepResponse{}
	var n int64
	b.ReportAllocs()
	for b.Loop() {
		slot.Slot = n
		if err := st.SendMsg(req); err != nil {
			b.Fatal(err)
		}
		if err := st.RecvMsg(resp); err != nil {
			b.Fatal(err)
		}
		n++
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "slot-round-trips/s")
	_ = st.CloseSend()
}
