package service

import (
	"testing"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// TestTraceOptionsSamplesPerUser: samples_per_user reaches the engine
// (which picks the decimation, loop.TraceDecimation), the message-size
// check uses that decimation, and a too-large trace names the field the
// caller set.
func TestTraceOptionsSamplesPerUser(t *testing.T) {
	topts, vs := traceOptions(&pb.TraceOptions{SamplesPerUser: 1500, Users: []int32{2}}, 10, 15000, 4<<20)
	if len(vs) != 0 || topts.SamplesPerUser != 1500 || topts.Decimation != 0 || len(topts.Users) != 1 {
		t.Fatalf("got %+v, %v", topts, vs)
	}
	if d := topts.DecimationFor(15000); d != 10 {
		t.Errorf("decimation %d, want 10", d)
	}
	// 10 users × (15000/10 + 1) samples × 26 bytes ≈ 390 kB > 256 kB / 2.
	_, vs = traceOptions(&pb.TraceOptions{SamplesPerUser: 1500}, 10, 15000, 256<<10)
	if len(vs) != 1 || vs[0].Field != "traces.samples_per_user" {
		t.Errorf("oversized trace by samples: %v", vs)
	}
	_, vs = traceOptions(&pb.TraceOptions{DecimationSlots: 10}, 10, 15000, 256<<10)
	if len(vs) != 1 || vs[0].Field != "traces.decimation_slots" {
		t.Errorf("oversized trace by decimation: %v", vs)
	}
	if topts, vs := traceOptions(&pb.TraceOptions{Users: []int32{1}}, 10, 15000, 4<<20); len(vs) != 0 || topts.Users != nil {
		t.Errorf("no decimation and no samples must mean no traces: %+v %v", topts, vs)
	}
}
