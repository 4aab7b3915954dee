package service

import (
	"context"
	"fmt"
	"runtime"
	"strings"
	"testing"
	"time"

	"buf.build/gen/go/bufbuild/protovalidate/protocolbuffers/go/buf/validate"
	"google.golang.org/protobuf/reflect/protoreflect"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/tune"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// FuzzSearchRequests decodes arbitrary bytes as a TuneRequest (kind 0) or
// a CapacityRequest (kind 1) and calls the service with a tiny cost bound:
// whatever the bytes, the answer is a result or a clean status, never a
// panic (INTERNAL) or an unknown code. The seed corpus is the tiny valid
// requests of the tests above.
func FuzzSearchRequests(f *testing.F) {
	for _, m := range []struct {
		kind uint8
		msg  proto.Message
	}{
		{0, tinyTuneRequest(f)},
		{1, tinyCapacityRequest(f)},
		{0, &pb.TuneRequest{Base: tinyTuneBase(f), Axes: []*pb.SweepAxis{{Path: "inner_loop.step_db", First: 0.25, Last: 2, Count: 4, Log: true}},
			Objective: &pb.Objective{Kind: pb.ObjectiveKind_OBJECTIVE_KIND_MIN_TX_POWER, OutageLimit: 0.1}}},
	} {
		b, err := proto.Marshal(m.msg)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(m.kind, b)
	}
	// 2e6 tap-slots: the seeds above fit (460800), anything much larger is
	// turned away before work.
	env := startEnv(f, viaBufconn, Config{MaxCost: 2e6})
	f.Fuzz(func(t *testing.T, kind uint8, data []byte) {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		var err error
		if kind%2 == 0 {
			req := &pb.TuneRequest{}
			if proto.Unmarshal(data, req) != nil {
				return
			}
			_, _, err = tuneCall(ctx, env, req)
		} else {
			req := &pb.CapacityRequest{}
			if proto.Unmarshal(data, req) != nil {
				return
			}
			_, _, err = capacityCall(ctx, env, req)
		}
		if err == nil {
			return
		}
		switch c := status.Code(err); c {
		case codes.InvalidArgument, codes.ResourceExhausted, codes.DeadlineExceeded:
		default:
			t.Fatalf("kind %d: code %v: %v", kind%2, c, err)
		}
	})
}

// allocDuring returns the bytes allocated (runtime.MemStats.TotalAlloc,
// client and server together: they share the process) while f runs.
func allocDuring(f func()) uint64 {
	var a, b runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&a)
	f()
	runtime.ReadMemStats(&b)
	return b.TotalAlloc - a.TotalAlloc
}

// spanAxis returns an axis of n distinct values 1, 2, ..., n on path.
func spanAxis(path string, n int) *pb.SweepAxis {
	v := make([]float64, n)
	for i := range v {
		v[i] = float64(i + 1)
	}
	return &pb.SweepAxis{Path: path, Values: v}
}

// TestAttacksRejectedBeforeExpansion replays the requests that tied up
// the server (issue 11, "Work before admission"): each is rejected before
// its grid is expanded, with allocation bounded far below what expansion
// took.
func TestAttacksRejectedBeforeExpansion(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	conds := func(n int) []*pb.Condition {
		out := make([]*pb.Condition, n)
		for i := range out {
			out[i] = &pb.Condition{Name: fmt.Sprintf("c%d", i), Weight: 1, Overrides: []*pb.Override{
				{Path: "groups[0].speeds[0].speed_kmh", Value: &pb.Override_Number{Number: float64(3 + i)}}}}
		}
		return out
	}
	t.Run("tune of 100000 candidates x 5 conditions", func(t *testing.T) {
		// Measured before: 561 MB and 4.6 s, then rejected for cost.
		req := &pb.TuneRequest{Base: tinyTuneBase(t),
			Axes: []*pb.SweepAxis{{Path: "inner_loop.step_db", First: 0.01, Last: 10, Count: 1000},
				{Path: "inner_loop.update_rate_hz", First: 500, Last: 1500, Count: 100}},
			Conditions: conds(5),
			Objective:  &pb.Objective{Kind: pb.ObjectiveKind_OBJECTIVE_KIND_MIN_SIR_ERROR_STD},
			Budget:     &pb.TuneBudget{MinReplications: 2, MaxReplications: 2}}
		if n := proto.Size(req); n > 4096 {
			t.Fatalf("request is %d bytes, want a small request", n)
		}
		// With the default message limit the answer's size rejects it;
		// with a huge limit its cost does (100000 × 5 × 2 runs × 50000
		// tap-slots of overhead alone exceed the default bound 2e10).
		big := startEnv(t, viaBufconn, Config{MaxSendMessageBytes: 1 << 30})
		for _, c := range []struct {
			env  *testEnv
			code codes.Code
		}{{env, codes.InvalidArgument}, {big, codes.ResourceExhausted}} {
			var err error
			alloc := allocDuring(func() { _, _, err = tuneCall(context.Background(), c.env, req) })
			st := wantCode(t, err, c.code)
			const bound = 32 << 20
			if alloc > bound {
				t.Errorf("rejection allocated %d bytes, want <= %d (expansion took 561 MB)", alloc, bound)
			}
			t.Logf("%v: %s; allocated %.1f MB", st.Code(), st.Message(), float64(alloc)/1e6)
		}
	})
	t.Run("sweep of 2^24 points", func(t *testing.T) {
		// Measured before: 135 s of work and +200 MB.
		axes := make([]*pb.SweepAxis, 8)
		paths := []string{"inner_loop.step_db", "inner_loop.update_rate_hz", "inner_loop.feedback_delay_slots",
			"inner_loop.command_error_prob", "receiver.noise_figure_db", "receiver.sir_estimation_error_db",
			"run.outage_margin_db", "groups[0].shadowing_sigma_db"}
		for i := range axes {
			axes[i] = spanAxis(paths[i], 8)
		}
		axes[3] = &pb.SweepAxis{Path: paths[3], First: 0, Last: 0.4, Count: 8}
		var err error
		alloc := allocDuring(func() {
			_, _, err = sweep(t, env, &pb.SweepRequest{Base: sweepBase(t), Axes: axes, SeedMode: pb.SeedMode_SEED_MODE_COMMON})
		})
		wantInvalid(t, err, "axes")
		if !strings.Contains(status.Convert(err).Message(), fmt.Sprint(tune.MaxGridPoints)) {
			t.Errorf("message %q does not state the point limit", status.Convert(err).Message())
		}
		if alloc > 8<<20 {
			t.Errorf("rejection allocated %d bytes, want <= 8 MiB", alloc)
		}
	})
	t.Run("sweep of 1M tiny points", func(t *testing.T) {
		var err error
		alloc := allocDuring(func() {
			_, _, err = sweep(t, env, &pb.SweepRequest{Base: sweepBase(t), SeedMode: pb.SeedMode_SEED_MODE_COMMON,
				Axes: []*pb.SweepAxis{{Path: "inner_loop.step_db", First: 0.01, Last: 10, Count: 1000},
					{Path: "inner_loop.update_rate_hz", First: 500, Last: 1500, Count: 1000}}})
		})
		wantInvalid(t, err, "axes")
		if alloc > 8<<20 {
			t.Errorf("rejection allocated %d bytes, want <= 8 MiB", alloc)
		}
	})
	t.Run("tune answer of about 19 MB", func(t *testing.T) {
		// Measured before: 54 s of work, then a failure to send 19 MB.
		req := &pb.TuneRequest{Base: tinyTuneBase(t),
			Axes:       []*pb.SweepAxis{{Path: "inner_loop.step_db", First: 0.1, Last: 10, Count: 1000}},
			Conditions: conds(64),
			Objective:  &pb.Objective{Kind: pb.ObjectiveKind_OBJECTIVE_KIND_MIN_SIR_ERROR_STD},
			Budget:     &pb.TuneBudget{MinReplications: 2, MaxReplications: 2}}
		prog, _, err := tuneCall(context.Background(), env, req)
		wantInvalid(t, err, "axes")
		if msg := status.Convert(err).Message(); !strings.Contains(msg, "maximum message size") {
			t.Errorf("message %q does not say the answer is too large", msg)
		}
		if len(prog) > 0 {
			t.Errorf("%d progress events before the rejection: work started", len(prog))
		}
	})
}

// TestSweepPerPointOverhead: a grid of many tiny points is charged
// tune.RunOverheadTapSlots per point, so it is rejected by a bound its
// simulated slots alone would pass.
func TestSweepPerPointOverhead(t *testing.T) {
	const points = 100000
	env := startEnv(t, viaBufconn, Config{MaxCost: 1e9})
	base := sweepBase(t)
	base.Groups = base.Groups[:1]
	base.Groups[0].Count = 1
	base.Groups[0].Profile, base.Groups[0].CustomTaps = "FLAT", nil
	base.Run.Slots, base.Run.WarmupSlots, base.Run.Batches = 40, 0, 20
	one := ScenarioFromProto(base)
	one.Normalise()
	if v := one.Validate(); len(v) > 0 {
		t.Fatal(v)
	}
	if sim := points * one.Cost(); sim > 1e9 {
		t.Fatalf("simulated part %d alone exceeds the bound; the test needs tiny points", sim)
	}
	_, _, err := sweep(t, env, &pb.SweepRequest{Base: base, SeedMode: pb.SeedMode_SEED_MODE_COMMON,
		Axes: []*pb.SweepAxis{{Path: "inner_loop.step_db", First: 0.01, Last: 10, Count: 1000},
			{Path: "inner_loop.update_rate_hz", First: 500, Last: 1500, Count: 100}}})
	subj, msg := quotaSubject(t, err)
	want := fmt.Sprint(int64(points) * (one.Cost() + tune.RunOverheadTapSlots))
	if subj != "max_cost" || !strings.Contains(msg, want) {
		t.Errorf("subject %q, message %q; want max_cost and the cost %s", subj, msg, want)
	}
}

// TestOneLimitOfAxisValues checks that the .proto rules use the domain's
// limits (tune.MaxAxisValues, tune.MaxAxes, tune.MaxGridPoints,
// loop.MaxUsers, fading.MaxSinusoids): one set of limits.
func TestOneLimitOfAxisValues(t *testing.T) {
	rules := func(msg protoreflect.MessageDescriptor, field string) *validate.FieldRules {
		fd := msg.Fields().ByName(protoreflect.Name(field))
		return proto.GetExtension(fd.Options(), validate.E_Field).(*validate.FieldRules)
	}
	axis := (&pb.SweepAxis{}).ProtoReflect().Descriptor()
	if got := rules(axis, "values").GetRepeated().GetMaxItems(); got != tune.MaxAxisValues {
		t.Errorf("SweepAxis.values max_items %d, tune.MaxAxisValues %d", got, tune.MaxAxisValues)
	}
	if got := rules(axis, "names").GetRepeated().GetMaxItems(); got != tune.MaxAxisValues {
		t.Errorf("SweepAxis.names max_items %d, tune.MaxAxisValues %d", got, tune.MaxAxisValues)
	}
	if got := rules(axis, "count").GetInt32().GetLte(); got != tune.MaxAxisValues {
		t.Errorf("SweepAxis.count lte %d, tune.MaxAxisValues %d", got, tune.MaxAxisValues)
	}
	for _, m := range []protoreflect.MessageDescriptor{(&pb.SweepRequest{}).ProtoReflect().Descriptor(), (&pb.TuneRequest{}).ProtoReflect().Descriptor()} {
		if got := rules(m, "axes").GetRepeated().GetMaxItems(); got != tune.MaxAxes {
			t.Errorf("%s.axes max_items %d, tune.MaxAxes %d", m.Name(), got, tune.MaxAxes)
		}
	}
	if got := rules((&pb.SweepRequest{}).ProtoReflect().Descriptor(), "point_indices").GetRepeated().GetMaxItems(); got != tune.MaxGridPoints {
		t.Errorf("SweepRequest.point_indices max_items %d, tune.MaxGridPoints %d", got, tune.MaxGridPoints)
	}
	// The scenario's limits that once disagreed (group count 1024 vs 1000,
	// sinusoids 1024 vs 256).
	group := (&pb.UserGroup{}).ProtoReflect().Descriptor()
	if got := rules(group, "count").GetInt32().GetLte(); got != loop.MaxUsers {
		t.Errorf("UserGroup.count lte %d, loop.MaxUsers %d", got, loop.MaxUsers)
	}
	if got := rules(group, "sinusoids").GetInt32().GetLte(); got != fading.MaxSinusoids {
		t.Errorf("UserGroup.sinusoids lte %d, fading.MaxSinusoids %d", got, fading.MaxSinusoids)
	}
	if got := rules((&pb.ChannelSpec{}).ProtoReflect().Descriptor(), "sinusoids").GetInt32().GetLte(); got != fading.MaxSinusoids {
		t.Errorf("ChannelSpec.sinusoids lte %d, fading.MaxSinusoids %d", got, fading.MaxSinusoids)
	}
}
