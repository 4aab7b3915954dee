package service

import (
	"context"
	"errors"
	"io"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/encoding"
	protocodec "google.golang.org/grpc/encoding/proto"
	"google.golang.org/grpc/mem"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// TestSlotInboxMatchesProto: slotInbox.decode gives the message that
// proto.Unmarshal gives (the reference decoder of the protobuf module), for
// well-formed slot messages in packed and unpacked encodings, for the forms
// it hands to proto.Unmarshal (config, joins, unknown fields, two slot
// fields), and for seeded random corruptions of them (same error or same
// message), each decoded into an inbox that held another message before.
func TestSlotInboxMatchesProto(t *testing.T) {
	slotReq := func(s *pb.LockstepSlot) *pb.LockstepRequest {
		return &pb.LockstepRequest{Message: &pb.LockstepRequest_Slot{Slot: s}}
	}
	mustMarshal := func(m proto.Message) []byte {
		b, err := proto.Marshal(m)
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	// unpacked encodes a slot with unpacked repeated scalars (proto2-style
	// writers; parsers must accept both, protobuf encoding guide "Packed
	// Repeated Fields").
	unpacked := func(slot int64, sir []float64, inactive []int32) []byte {
		var body []byte
		body = protowire.AppendTag(body, 1, protowire.VarintType)
		body = protowire.AppendVarint(body, uint64(slot))
		for _, x := range sir {
			body = protowire.AppendTag(body, 2, protowire.Fixed64Type)
			body = protowire.AppendFixed64(body, math.Float64bits(x))
		}
		for _, u := range inactive {
			body = protowire.AppendTag(body, 4, protowire.VarintType)
			body = protowire.AppendVarint(body, uint64(int64(u)))
		}
		b := protowire.AppendTag(nil, 2, protowire.BytesType)
		return protowire.AppendBytes(b, body)
	}
	full := &pb.LockstepSlot{Slot: 41, SirDb: []float64{1.5, -3, math.NaN(), 100},
		Blocks:        []*pb.BlockResult{{User: 2, Error: true}, {User: 0}, {User: -1}},
		InactiveUsers: []int32{1, 3, -7}, LeaveUsers: []int32{2}}
	withUnknown := mustMarshal(slotReq(&pb.LockstepSlot{Slot: 1, SirDb: []float64{2}}))
	withUnknown = protowire.AppendTag(withUnknown, 9, protowire.VarintType)
	withUnknown = protowire.AppendVarint(withUnknown, 5)
	twoSlots := append(mustMarshal(slotReq(&pb.LockstepSlot{Slot: 1, SirDb: []float64{2}})),
		mustMarshal(slotReq(&pb.LockstepSlot{SirDb: []float64{3}, LeaveUsers: []int32{0}}))...)
	cases := []struct {
		name     string
		b        []byte
		wantFast bool
	}{
		{"empty slot", mustMarshal(slotReq(&pb.LockstepSlot{})), true},
		{"sirs", mustMarshal(slotReq(&pb.LockstepSlot{Slot: 7, SirDb: []float64{5, -2.25, 0}})), true},
		{"all fast fields", mustMarshal(slotReq(full)), true},
		{"unpacked", unpacked(3, []float64{1, 2, 3}, []int32{0, 2}), true},
		{"config", mustMarshal(lockstepConfig(2)), false},
		{"join", mustMarshal(slotReq(&pb.LockstepSlot{Slot: 2, SirDb: []float64{1}, JoinUsers: []*pb.LockstepUser{lockstepUser(1, 0)}})), false},
		{"unknown field", withUnknown, false},
		{"two slot fields", twoSlots, false},
		{"empty message", nil, false},
	}
	in := newSlotInbox()
	check := func(t *testing.T, b []byte) (fast bool, decErr error) {
		t.Helper()
		// Fill the inbox with another message first: nothing may leak.
		in.prepare()
		if err := in.decode(mustMarshal(slotReq(full))); err != nil || !in.fast {
			t.Fatalf("refill: fast %v, err %v", in.fast, err)
		}
		want := &pb.LockstepRequest{}
		wantErr := proto.Unmarshal(b, want)
		in.prepare()
		err := in.decode(b)
		if (err != nil) != (wantErr != nil) {
			t.Fatalf("decode error %v, proto.Unmarshal error %v", err, wantErr)
		}
		if err == nil && !proto.Equal(in.message(), want) {
			t.Fatalf("decoded %v, proto.Unmarshal %v", in.message(), want)
		}
		return in.fast, err
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if fast, _ := check(t, c.b); fast != c.wantFast {
				t.Errorf("wire path taken %v, want %v", fast, c.wantFast)
			}
		})
	}
	// Seeded corruptions: truncations and byte flips of the cases (fewer
	// under the race detector, which slows decoding tenfold).
	corruptions := 20000
	if lockstepRace {
		corruptions = 3000
	}
	r := rand.New(rand.NewPCG(13, 1))
	var fast, failed int
	for i := range corruptions {
		src := cases[i%len(cases)].b
		if len(src) == 0 {
			continue
		}
		b := append([]byte(nil), src...)
		switch r.IntN(3) {
		case 0:
			b = b[:r.IntN(len(b))]
		default:
			for range 1 + r.IntN(3) {
				b[r.IntN(len(b))] = byte(r.Uint32())
			}
		}
		f, err := check(t, b)
		if f {
			fast++
		}
		if err != nil {
			failed++
		}
	}
	// Both outcomes must occur, or the corruptions test nothing.
	if fast == 0 || failed == 0 {
		t.Errorf("corruptions: %d decoded on the wire path, %d failed; want some of each", fast, failed)
	}
}

// TestSlotInboxWithOtherCodecs: a slotInbox is a proto.Message, so a codec
// other than lenientCodec (e.g. gRPC's own proto codec, should a front end
// bring its own) fills the embedded request and message() returns it.
func TestSlotInboxWithOtherCodecs(t *testing.T) {
	want := &pb.LockstepRequest{Message: &pb.LockstepRequest_Slot{Slot: &pb.LockstepSlot{Slot: 3, SirDb: []float64{1, 2}, LeaveUsers: []int32{1}}}}
	b, err := proto.Marshal(want)
	if err != nil {
		t.Fatal(err)
	}
	in := newSlotInbox()
	in.prepare()
	if err := encoding.GetCodecV2(protocodec.Name).Unmarshal(mem.BufferSlice{mem.SliceBuffer(b)}, in); err != nil {
		t.Fatal(err)
	}
	if in.fast || !proto.Equal(in.message(), want) {
		t.Errorf("gRPC's proto codec: wire path %v, message %v; want %v from the embedded request", in.fast, in.message(), want)
	}
	// And lenientCodec takes the wire path.
	in.prepare()
	if err := newLenientCodec().Unmarshal(mem.BufferSlice{mem.SliceBuffer(b)}, in); err != nil || takeDecodeError(in) != nil {
		t.Fatal(err)
	}
	if !in.fast || !proto.Equal(in.message(), want) {
		t.Errorf("lenientCodec: wire path %v, message %v; want %v", in.fast, in.message(), want)
	}
}

// TestLockstepUndecodableSlot: undecodable bytes after the configuration
// (a slot field whose length runs past the message, protobuf encoding
// guide "Length-Delimited Records") end the stream with INVALID_ARGUMENT,
// and no decode error is left behind.
func TestLockstepUndecodableSlot(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	desc := &grpc.StreamDesc{StreamName: "Lockstep", ServerStreams: true, ClientStreams: true}
	cs, err := env.conn.NewStream(context.Background(), desc, pb.LoopService_Lockstep_FullMethodName, grpc.ForceCodec(rawCodec{}))
	if err != nil {
		t.Fatal(err)
	}
	cfg, err := proto.Marshal(lockstepConfig(1))
	if err != nil {
		t.Fatal(err)
	}
	for _, m := range [][]byte{cfg, {0x12, 0x64, 0x08}} {
		if err := cs.SendMsg(m); err != nil && !errors.Is(err, io.EOF) {
			t.Fatal(err)
		}
	}
	var out []byte
	err = cs.RecvMsg(&out)
	if st := wantCode(t, err, codes.InvalidArgument); st != nil && !strings.Contains(st.Message(), "not a valid protobuf") {
		t.Errorf("status message %q", st.Message())
	}
	eventually(t, "the stream logged", func() bool { return len(logLines(t, env, "/Lockstep")) == 1 })
	decodeErrors.Range(func(k, _ any) bool {
		t.Errorf("decode error of %T left behind", k)
		return true
	})
}
