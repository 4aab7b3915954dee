package service

import (
	"testing"

	"google.golang.org/protobuf/proto"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// TestLockstepSlotAllocs: the Lockstep handler's per-slot core (wire
// decoding into the stream's inbox, checkSlot, step) allocates nothing,
// for plain slots, slots with block results for every user, and slots
// with inactive and leaving users. Joins build controllers and are not
// per-slot work.
func TestLockstepSlotAllocs(t *testing.T) {
	srv, err := NewServer(Config{})
	if err != nil {
		t.Fatal(err)
	}
	const users = 64
	cfg := lockstepConfig(users)
	cfg.GetConfig().Receiver = &pb.Receiver{SirEstimationErrorDb: 1}
	sess, vs := srv.newLockstepSession(cfg)
	if len(vs) > 0 {
		t.Fatal(vs)
	}
	blocks := make([]*pb.BlockResult, users)
	for u := range blocks {
		blocks[u] = &pb.BlockResult{User: int32(u), Error: u%10 == 0}
	}
	sir := make([]float64, users)
	for u := range sir {
		sir[u] = float64(u%9) - 2
	}
	in := newSlotInbox()
	for _, c := range []struct {
		name string
		slot *pb.LockstepSlot
	}{
		{"plain", &pb.LockstepSlot{SirDb: sir}},
		{"blocks", &pb.LockstepSlot{SirDb: sir, Blocks: blocks}},
		{"inactive", &pb.LockstepSlot{SirDb: sir, InactiveUsers: []int32{1, 5, 9}}},
		{"leave", &pb.LockstepSlot{SirDb: sir, LeaveUsers: []int32{63}}},
	} {
		t.Run(c.name, func(t *testing.T) {
			// Encode the slots ahead: AllocsPerRun(runs) calls f runs+1 times.
			const runs = 200
			msgs := make([][]byte, runs+1)
			for k := range msgs {
				c.slot.Slot = sess.next + int64(k)
				b, err := proto.Marshal(&pb.LockstepRequest{Message: &pb.LockstepRequest_Slot{Slot: c.slot}})
				if err != nil {
					t.Fatal(err)
				}
				msgs[k] = b
				c.slot.LeaveUsers = nil // a user leaves once
			}
			k := 0
			core := func() {
				in.prepare()
				if err := in.decode(msgs[k]); err != nil || !in.fast {
					t.Fatalf("decode: wire path %v, err %v", in.fast, err)
				}
				k++
				slot := in.message().GetSlot()
				if vs := srv.checkSlot(sess, slot); len(vs) > 0 {
					t.Fatal(vs)
				}
				sess.step(slot)
			}
			if a := testing.AllocsPerRun(runs, core); a != 0 {
				t.Errorf("%g allocations per slot in the handler core, want 0", a)
			}
		})
	}
}

// TestLockstepRoundTripAllocs: a Lockstep round trip of 64 users over
// bufconn (client and server together, gRPC's own allocations included)
// allocates no more than a round trip of the bare echo stream of
// BenchmarkLockstep64EchoBaseline with the same messages and transport
// settings: the handler adds no per-slot allocation to gRPC's.
func TestLockstepRoundTripAllocs(t *testing.T) {
	if lockstepRace {
		t.Skip("the race detector drops pooled buffers at random")
	}
	ls := startLockstep64(t, startEnv(t, viaBufconn, Config{}))
	echo := startEcho64(t, viaBufconn)
	const runs = 300 // 20 block-result slots in each
	for range 30 {   // past the streams' first messages
		ls.roundTrip(t)
		echo.roundTrip(t)
	}
	a := testing.AllocsPerRun(runs, func() { ls.roundTrip(t) })
	e := testing.AllocsPerRun(runs, func() { echo.roundTrip(t) })
	t.Logf("allocations per round trip: Lockstep %.1f, echo %.1f", a, e)
	// Half an allocation of slack for background work of the transports
	// (keepalive, flow-control updates) during the runs.
	if a > e+0.5 {
		t.Errorf("Lockstep round trip allocates %.1f objects, the bare echo %.1f", a, e)
	}
}
