package service

import (
	"context"
	"errors"
	"io"
	"testing"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// metricValue sums the samples of metric family name whose labels include
// every pair of want.
func metricValue(t *testing.T, env *testEnv, name string, want map[string]string) float64 {
	t.Helper()
	mfs, err := env.srv.metrics.registry.Gather()
	if err != nil {
		t.Fatal(err)
	}
	var sum float64
	for _, mf := range mfs {
		if mf.GetName() != name {
			continue
		}
		for _, m := range mf.GetMetric() {
			n := 0
			for _, lp := range m.GetLabel() {
				if v, ok := want[lp.GetName()]; ok && v == lp.GetValue() {
					n++
				}
			}
			if n == len(want) {
				sum += m.GetCounter().GetValue()
			}
		}
	}
	return sum
}

// TestLockstepMetrics: a Lockstep stream is counted per call (started,
// handled with its code) and per slot (fadeloop_lockstep_slots_total),
// without gRPC's per-message counters; other streams keep those.
func TestLockstepMetrics(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	st, err := env.loop.Lockstep(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if err := st.Send(lockstepConfig(2)); err != nil {
		t.Fatal(err)
	}
	const slots = 5
	for i := range int64(slots) {
		if err := st.Send(slotMsg(i, 1, 2)); err != nil {
			t.Fatal(err)
		}
		if _, err := st.Recv(); err != nil {
			t.Fatal(err)
		}
	}
	if err := st.CloseSend(); err != nil {
		t.Fatal(err)
	}
	if _, err := st.Recv(); !errors.Is(err, io.EOF) {
		t.Fatalf("end of stream: %v", err)
	}
	ls := map[string]string{"grpc_method": "Lockstep"}
	for _, c := range []struct {
		name string
		want float64
	}{
		{"grpc_server_started_total", 1},
		{"fadeloop_lockstep_slots_total", slots},
		{"grpc_server_msg_received_total", 0},
		{"grpc_server_msg_sent_total", 0},
	} {
		labels := ls
		if c.name == "fadeloop_lockstep_slots_total" {
			labels = nil
		}
		if got := metricValue(t, env, c.name, labels); got != c.want {
			t.Errorf("%s{Lockstep} = %g, want %g", c.name, got, c.want)
		}
	}
	if got := metricValue(t, env, "grpc_server_handled_total", map[string]string{"grpc_method": "Lockstep", "grpc_code": "OK"}); got != 1 {
		t.Errorf("grpc_server_handled_total{Lockstep, OK} = %g, want 1", got)
	}
	// Another stream: its messages are counted.
	gs, err := env.channel.StreamGains(context.Background(), &pb.StreamGainsRequest{
		Channel: &pb.ChannelSpec{DopplerHz: 50, SampleRateHz: 1500, Generator: pb.Generator_GENERATOR_DEFAULT,
			CustomTaps: []*pb.Tap{{DelayNs: 0}}},
		Links: 1, Samples: 64, Seed: 1,
	})
	if err != nil {
		t.Fatal(err)
	}
	var chunks float64
	for {
		_, err := gs.Recv()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		chunks++
	}
	if got := metricValue(t, env, "grpc_server_msg_sent_total", map[string]string{"grpc_method": "StreamGains"}); got != chunks || chunks == 0 {
		t.Errorf("grpc_server_msg_sent_total{StreamGains} = %g, want the %g chunks received", got, chunks)
	}
}
