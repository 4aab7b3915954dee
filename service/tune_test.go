package service

import (
	"context"
	"fmt"
	"strings"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/loop/tune"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// tinyTuneBase is the small scenario (4 users) cut to 600 slots (100 of
// them warm-up): 2400 user-slots per run.
func tinyTuneBase(t testing.TB) *pb.Scenario {
	sc := smallScenario(t)
	sc.Run.Slots, sc.Run.WarmupSlots, sc.Run.Batches = 600, 100, 20
	return sc
}

// tinyTuneRequest searches three step sizes over two speed conditions for
// the smallest SIR error spread, with at most 6 replications each.
func tinyTuneRequest(t testing.TB) *pb.TuneRequest {
	return &pb.TuneRequest{
		Base: tinyTuneBase(t),
		Axes: []*pb.SweepAxis{{Path: "inner_loop.step_db", Values: []float64{0.5, 1, 2}}},
		Conditions: []*pb.Condition{
			{Name: "walking", Weight: 2, Overrides: []*pb.Override{
				{Path: "groups[0].speeds[0].speed_kmh", Value: &pb.Override_Number{Number: 3}}}},
			{Name: "driving", Weight: 1, Overrides: []*pb.Override{
				{Path: "groups[0].speeds[0].speed_kmh", Value: &pb.Override_Number{Number: 60}}}},
		},
		Objective:          &pb.Objective{Kind: pb.ObjectiveKind_OBJECTIVE_KIND_MIN_SIR_ERROR_STD},
		Budget:             &pb.TuneBudget{MaxReplications: 6},
		ProgressIntervalMs: 1,
	}
}

// tuneCall runs a Tune call and returns the progress events and the
// recommendation.
func tuneCall(ctx context.Context, env *testEnv, req *pb.TuneRequest) ([]*pb.SearchProgress, *pb.Recommendation, error) {
	st, err := env.sim.Tune(ctx, req)
	if err != nil {
		return nil, nil, err
	}
	msgs, err := drain(st.Recv)
	if err != nil {
		return nil, nil, err
	}
	var prog []*pb.SearchProgress
	var rec *pb.Recommendation
	for i, m := range msgs {
		switch e := m.GetEvent().(type) {
		case *pb.TuneResponse_Progress:
			prog = append(prog, e.Progress)
		case *pb.TuneResponse_Recommendation:
			if i != len(msgs)-1 {
				return nil, nil, fmt.Errorf("recommendation is message %d of %d, not the last", i, len(msgs))
			}
			rec = e.Recommendation
		}
	}
	if rec == nil {
		return nil, nil, fmt.Errorf("stream ended without a recommendation")
	}
	return prog, rec, nil
}

// capacityCall runs a Capacity call and returns the progress events and
// the result.
func capacityCall(ctx context.Context, env *testEnv, req *pb.CapacityRequest) ([]*pb.SearchProgress, *pb.CapacityResult, error) {
	st, err := env.sim.Capacity(ctx, req)
	if err != nil {
		return nil, nil, err
	}
	msgs, err := drain(st.Recv)
	if err != nil {
		return nil, nil, err
	}
	var prog []*pb.SearchProgress
	var res *pb.CapacityResult
	for i, m := range msgs {
		switch e := m.GetEvent().(type) {
		case *pb.CapacityResponse_Progress:
			prog = append(prog, e.Progress)
		case *pb.CapacityResponse_Result:
			if i != len(msgs)-1 {
				return nil, nil, fmt.Errorf("result is message %d of %d, not the last", i, len(msgs))
			}
			res = e.Result
		}
	}
	if res == nil {
		return nil, nil, fmt.Errorf("stream ended without a result")
	}
	return prog, res, nil
}

func TestTuneMatchesDirectCall(t *testing.T) {
	req := tinyTuneRequest(t)
	direct, err := tune.Tune(context.Background(), TuneRequestFromProto(req), tune.Options{})
	if err != nil {
		t.Fatal(err)
	}
	want := RecommendationToProto(direct, 0)
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{})
			prog, rec, err := tuneCall(context.Background(), env, req)
			if err != nil {
				t.Fatal(err)
			}
			if rec.GetEffort().GetWallTimeS() <= 0 {
				t.Errorf("effort.wall_time_s = %g, want > 0", rec.GetEffort().GetWallTimeS())
			}
			got := proto.Clone(rec).(*pb.Recommendation)
			got.Effort.WallTimeS = 0
			if !proto.Equal(got, want) {
				t.Fatalf("Tune differs from tune.Tune for the same request:\ngot  %v\nwant %v", got.GetOverall(), want.GetOverall())
			}
			if len(rec.GetConditions()) != 2 || len(rec.GetCandidates()) != 3 || rec.GetSeed() != 7 ||
				rec.GetConditions()[0].GetBaseline() == nil || rec.GetOverall().GetReason() == "" {
				t.Errorf("recommendation shape: %d conditions, %d candidates, seed %d, baseline %v, reason %q",
					len(rec.GetConditions()), len(rec.GetCandidates()), rec.GetSeed(),
					rec.GetConditions()[0].GetBaseline() != nil, rec.GetOverall().GetReason())
			}
			if len(prog) == 0 {
				t.Fatal("no progress events")
			}
			checkSearchProgress(t, prog)
			last := prog[len(prog)-1]
			total := rec.GetEffort().GetReplications() + rec.GetEffort().GetBaselineReplications()
			if last.GetReplicationsDone() != total || last.GetCandidatesRemaining() > 3 {
				t.Errorf("last progress %v: want every run of the effort (%d runs), at most 3 candidates", last, total)
			}
		})
	}
}

// checkSearchProgress checks a search's progress events as the stream
// carries them (some may be dropped by the interval and the one-slot
// mailbox): replications and fraction done never decrease, the fraction
// stays in [0, 1] and below 1 until the last event, which is exactly 1.
func checkSearchProgress(t *testing.T, prog []*pb.SearchProgress) {
	t.Helper()
	if len(prog) == 0 {
		t.Fatal("no progress events")
	}
	for i, p := range prog {
		f := p.GetFractionDone()
		if f < 0 || f > 1 || (f >= 1 && i < len(prog)-1) {
			t.Errorf("event %d of %d: fraction done %g", i, len(prog), f)
		}
		if i > 0 && (p.GetReplicationsDone() < prog[i-1].GetReplicationsDone() || f < prog[i-1].GetFractionDone()) {
			t.Errorf("progress went backwards: %v then %v", prog[i-1], p)
		}
	}
	if f := prog[len(prog)-1].GetFractionDone(); f != 1 {
		t.Errorf("last fraction done %g, want exactly 1", f)
	}
}

func tinyCapacityRequest(t testing.TB) *pb.CapacityRequest {
	return &pb.CapacityRequest{
		Base:               tinyTuneBase(t),
		OutageLimit:        0.05,
		MaxCount:           24,
		Replications:       2,
		ProgressIntervalMs: 1,
	}
}

func TestCapacityMatchesDirectCall(t *testing.T) {
	req := tinyCapacityRequest(t)
	direct, err := tune.Capacity(context.Background(), CapacityRequestFromProto(req), tune.Options{})
	if err != nil {
		t.Fatal(err)
	}
	want := CapacityResultToProto(direct, 0)
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{})
			prog, res, err := capacityCall(context.Background(), env, req)
			if err != nil {
				t.Fatal(err)
			}
			got := proto.Clone(res).(*pb.CapacityResult)
			got.WallTimeS = 0
			if !proto.Equal(got, want) {
				t.Fatalf("Capacity differs from tune.Capacity:\ngot  %v\nwant %v", got, want)
			}
			if len(res.GetEvaluated()) < 2 || res.GetPole() <= 0 || res.GetReason() == "" || len(prog) == 0 {
				t.Fatalf("result shape: %d counts, pole %g, reason %q, %d progress events",
					len(res.GetEvaluated()), res.GetPole(), res.GetReason(), len(prog))
			}
			checkSearchProgress(t, prog)
			if last := prog[len(prog)-1]; last.GetReplicationsDone() != res.GetReplications() {
				t.Errorf("last progress %v: want every run (%d)", last, res.GetReplications())
			}
		})
	}
}

// TestSearchEnumsMirror checks that the tuner's enums carry the proto
// value names at the same numbers (the conversions are casts).
func TestSearchEnumsMirror(t *testing.T) {
	vals := pb.ObjectiveKind(0).Descriptor().Values()
	for i := range vals.Len() {
		v := vals.Get(i)
		b, _ := tune.ObjectiveKind(v.Number()).MarshalText()
		if string(b) != string(v.Name()) {
			t.Errorf("ObjectiveKind %d: %s in the proto, %s in tune", v.Number(), v.Name(), b)
		}
	}
	vals = pb.CandidateStatus(0).Descriptor().Values()
	for i := range vals.Len() {
		v := vals.Get(i)
		b, _ := tune.CandidateStatus(v.Number()).MarshalText()
		if string(b) != string(v.Name()) {
			t.Errorf("CandidateStatus %d: %s in the proto, %s in tune", v.Number(), v.Name(), b)
		}
	}
}

func TestTuneBadInput(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	mut := func(f func(r *pb.TuneRequest)) *pb.TuneRequest {
		r := tinyTuneRequest(t)
		f(r)
		return r
	}
	cases := []struct {
		name  string
		req   *pb.TuneRequest
		field string
	}{
		{"objective kind unspecified", mut(func(r *pb.TuneRequest) { r.Objective.Kind = 0 }), "objective.kind"},
		{"objective missing", mut(func(r *pb.TuneRequest) { r.Objective = nil }), "objective"},
		{"Tx power objective without outage limit", mut(func(r *pb.TuneRequest) {
			r.Objective.Kind = pb.ObjectiveKind_OBJECTIVE_KIND_MIN_TX_POWER
		}), "objective"},
		{"axis without values or range", mut(func(r *pb.TuneRequest) { r.Axes[0].Values = nil }), "axes[0].values"},
		{"axis with values and a range", mut(func(r *pb.TuneRequest) { r.Axes[0].Count = 3 }), "axes[0].count"},
		{"log range through zero", mut(func(r *pb.TuneRequest) {
			r.Axes[0] = &pb.SweepAxis{Path: "inner_loop.step_db", First: 0, Last: 2, Count: 3, Log: true}
		}), "axes[0].first"},
		{"range with equal ends", mut(func(r *pb.TuneRequest) {
			r.Axes[0] = &pb.SweepAxis{Path: "inner_loop.step_db", First: 1, Last: 1, Count: 3}
		}), "axes[0].last"},
		{"duplicate axis value", mut(func(r *pb.TuneRequest) { r.Axes[0].Values = []float64{1, 1} }), "axes[0].values[1]"},
		{"unknown axis path", mut(func(r *pb.TuneRequest) { r.Axes[0].Path = "inner_loop.stepsize_db" }), "axes[0].path"},
		{"empty axis path", mut(func(r *pb.TuneRequest) { r.Axes[0].Path = "" }), "axes[0].path"},
		{"axis value out of the field's range", mut(func(r *pb.TuneRequest) { r.Axes[0].Values = []float64{1, 20} }), "axes[0].values[1]"},
		{"override without a value", mut(func(r *pb.TuneRequest) { r.Conditions[0].Overrides[0].Value = nil }), "conditions[0].overrides[0].value"},
		{"unknown override path", mut(func(r *pb.TuneRequest) { r.Conditions[1].Overrides[0].Path = "groups[3].count" }), "conditions[1].overrides[0].path"},
		{"condition weight zero", mut(func(r *pb.TuneRequest) { r.Conditions[0].Weight = 0 }), "conditions[0].weight"},
		{"condition without a name", mut(func(r *pb.TuneRequest) { r.Conditions[0].Name = "" }), "conditions[0].name"},
		{"override leaves an invalid scenario", mut(func(r *pb.TuneRequest) {
			r.Conditions[1].Overrides[0].Value = &pb.Override_Number{Number: 900}
		}), "conditions[1].overrides[0]"},
		{"confidence out of range", mut(func(r *pb.TuneRequest) { r.Confidence = 0.3 }), "confidence"},
		{"one min replication", mut(func(r *pb.TuneRequest) { r.Budget.MinReplications = 1 }), "budget.min_replications"},
		{"max below min replications", mut(func(r *pb.TuneRequest) { r.Budget.MinReplications, r.Budget.MaxReplications = 8, 4 }), "budget.max_replications"},
		{"missing base", mut(func(r *pb.TuneRequest) { r.Base = nil }), "base"},
		{"invalid base", mut(func(r *pb.TuneRequest) { r.Base.Groups[0].Placement = 99 }), "base.groups[0].placement"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, _, err := tuneCall(context.Background(), env, c.req)
			wantInvalid(t, err, c.field)
		})
	}
}

func TestCapacityBadInput(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	mut := func(f func(r *pb.CapacityRequest)) *pb.CapacityRequest {
		r := tinyCapacityRequest(t)
		f(r)
		return r
	}
	cases := []struct {
		name  string
		req   *pb.CapacityRequest
		field string
	}{
		{"group not in the scenario", mut(func(r *pb.CapacityRequest) { r.Group = 3 }), "group"},
		{"outage limit zero", mut(func(r *pb.CapacityRequest) { r.OutageLimit = 0 }), "outage_limit"},
		{"outage limit one", mut(func(r *pb.CapacityRequest) { r.OutageLimit = 1 }), "outage_limit"},
		{"max count below min count", mut(func(r *pb.CapacityRequest) { r.MinCount, r.MaxCount = 8, 4 }), "max_count"},
		{"explicit placement", mut(func(r *pb.CapacityRequest) {
			r.Base.Groups[0].Placement = pb.Placement_PLACEMENT_EXPLICIT
			r.Base.Groups[0].DistancesM = []float64{100, 200, 300, 400}
			r.Base.Groups[0].MinDistanceM, r.Base.Groups[0].MaxDistanceM = 0, 0
		}), "group"},
		{"confidence out of range", mut(func(r *pb.CapacityRequest) { r.Confidence = 0.2 }), "confidence"},
		{"missing base", mut(func(r *pb.CapacityRequest) { r.Base = nil }), "base"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, _, err := capacityCall(context.Background(), env, c.req)
			wantInvalid(t, err, c.field)
		})
	}
}

// quotaSubject returns the subject of st's first QuotaFailure violation.
func quotaSubject(t *testing.T, err error) (string, string) {
	t.Helper()
	st := wantCode(t, err, codes.ResourceExhausted)
	for _, d := range st.Details() {
		if q, ok := d.(*errdetails.QuotaFailure); ok && len(q.GetViolations()) > 0 {
			return q.GetViolations()[0].GetSubject(), st.Message()
		}
	}
	return "", st.Message()
}

func TestSearchCostBound(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{MaxCost: 1000})
	_, _, err := tuneCall(context.Background(), env, tinyTuneRequest(t))
	subj, msg := quotaSubject(t, err)
	// Worst case: 3 candidates × 2 conditions × 6 replications plus 2
	// conditions × 6 baseline replications = 48 runs of 4 users × 600
	// slots (warm-up included), times 2 RAKE fingers (PEDA resolves two
	// paths at 3.84 Mchip/s) = 230400 tap-slots, plus 48 ×
	// tune.RunOverheadTapSlots (50000) = 2630400.
	if subj != "max_cost" || !strings.Contains(msg, "max_cost = 1000") || !strings.Contains(msg, "2630400") {
		t.Errorf("Tune over the cost bound: subject %q, message %q", subj, msg)
	}
	_, _, err = capacityCall(context.Background(), env, tinyCapacityRequest(t))
	subj, msg = quotaSubject(t, err)
	if subj != "max_cost" || !strings.Contains(msg, "max_cost = 1000") {
		t.Errorf("Capacity over the cost bound: subject %q, message %q", subj, msg)
	}
}

func TestTuneBudgetTooSmall(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	req := tinyTuneRequest(t)
	// The first round alone needs 3 × 2 × 2 runs of 2400 user-slots.
	req.Budget.MaxUserSlots = 5000
	_, _, err := tuneCall(context.Background(), env, req)
	subj, msg := quotaSubject(t, err)
	if subj != "budget.max_user_slots" || !strings.Contains(msg, "5000") {
		t.Errorf("subject %q, message %q: want the budget field and its bound", subj, msg)
	}
}

// longTuneRequest tunes the canonical scenario (64 users, 90 000 slots per
// run): seconds of work per run, long enough to cancel mid-search.
func longTuneRequest() *pb.TuneRequest {
	return &pb.TuneRequest{
		Base:      longScenario(),
		Axes:      []*pb.SweepAxis{{Path: "inner_loop.step_db", Values: []float64{0.5, 1}}},
		Objective: &pb.Objective{Kind: pb.ObjectiveKind_OBJECTIVE_KIND_MIN_OUTAGE},
	}
}

// TestTuneCancellationStopsPromptly and TestCapacityCancellationStopsPromptly
// check by work, not wall time (the machine may be busy), that a
// cancelled search stops: its run slot is freed and the server counted no
// finished search (a search that ignored its context would have run to its
// answer and been counted). How soon one run stops after a cancel is the
// engine's per-block context check (package loop).
func TestTuneCancellationStopsPromptly(t *testing.T) {
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{MaxConcurrentRuns: 1, QueueLength: -1})
			before := simulatedUserSlots(t, env)
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			st, err := env.sim.Tune(ctx, longTuneRequest())
			if err != nil {
				t.Fatal(err)
			}
			waitSlotTaken(t, env)
			cancel()
			_, err = drain(st.Recv)
			wantCode(t, err, codes.Canceled)
			stoppedUnfinished(t, env, before)
		})
	}
}

func TestCapacityCancellationStopsPromptly(t *testing.T) {
	env := startEnv(t, viaLoopback, Config{MaxConcurrentRuns: 1, QueueLength: -1})
	before := simulatedUserSlots(t, env)
	ctx, cancel := context.WithTimeout(context.Background(), 150*time.Millisecond)
	defer cancel()
	_, _, err := capacityCall(ctx, env, &pb.CapacityRequest{Base: longScenario(), OutageLimit: 0.05, MaxCount: 128})
	wantCode(t, err, codes.DeadlineExceeded)
	stoppedUnfinished(t, env, before)
}

// TestSweepRangeAxis checks that a range axis (first, last, count) sweeps
// the same points as the listed values it stands for.
func TestSweepRangeAxis(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	run := func(ax *pb.SweepAxis) []*pb.SweepPoint {
		st, err := env.sim.Sweep(context.Background(), &pb.SweepRequest{Base: tinyTuneBase(t),
			Axes: []*pb.SweepAxis{ax}, SeedMode: pb.SeedMode_SEED_MODE_COMMON})
		if err != nil {
			t.Fatal(err)
		}
		msgs, err := drain(st.Recv)
		if err != nil {
			t.Fatal(err)
		}
		pts := make([]*pb.SweepPoint, 3)
		for _, m := range msgs {
			if p := m.GetPoint(); p != nil {
				r := proto.Clone(p.GetReport()).(*pb.RunReport)
				r.WallTimeS, r.UserSlotsPerS = 0, 0
				pts[p.GetIndex()] = &pb.SweepPoint{Index: p.GetIndex(), Coordinates: p.GetCoordinates(), Seed: p.GetSeed(), Report: r}
			}
		}
		return pts
	}
	byRange := run(&pb.SweepAxis{Path: "inner_loop.step_db", First: 0.5, Last: 2, Count: 3})
	listed := run(&pb.SweepAxis{Path: "inner_loop.step_db", Values: []float64{0.5, 1.25, 2}})
	for i := range listed {
		if !proto.Equal(byRange[i], listed[i]) {
			t.Errorf("point %d: range axis gives %v, listed values %v", i, byRange[i].GetCoordinates(), listed[i].GetCoordinates())
		}
	}
	// 1025 range values break the one limit of values per axis
	// (tune.MaxAxisValues, the same number in the .proto rule).
	st, err := env.sim.Sweep(context.Background(), &pb.SweepRequest{Base: tinyTuneBase(t),
		Axes: []*pb.SweepAxis{{Path: "inner_loop.step_db", Count: tune.MaxAxisValues + 1, First: 1, Last: 2}}, SeedMode: pb.SeedMode_SEED_MODE_COMMON})
	if err == nil {
		_, err = drain(st.Recv)
	}
	wantInvalid(t, err, "axes[0].count")
}
