package service

import (
	"context"
	"encoding/json"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

func sweepBase(t testing.TB) *pb.Scenario {
	sc := smallScenario(t)
	sc.Run.Slots = 1500
	sc.Run.WarmupSlots = 150
	sc.Run.Replications = 1
	return sc
}

func sweepAxes() []*pb.SweepAxis {
	return []*pb.SweepAxis{
		{Path: "inner_loop.step_db", Values: []float64{0.5, 1, 2}},
		{Path: "inner_loop.feedback_delay_slots", Values: []float64{0, 2}},
	}
}

// sweep runs a Sweep call and returns the points by index and the summary.
func sweep(t *testing.T, env *testEnv, req *pb.SweepRequest) (map[int64]*pb.SweepPoint, *pb.SweepSummary, error) {
	t.Helper()
	st, err := env.sim.Sweep(context.Background(), req)
	if err != nil {
		return nil, nil, err
	}
	msgs, err := drain(st.Recv)
	if err != nil {
		return nil, nil, err
	}
	points := map[int64]*pb.SweepPoint{}
	var sum *pb.SweepSummary
	for i, m := range msgs {
		switch e := m.GetEvent().(type) {
		case *pb.SweepResponse_Point:
			if sum != nil {
				t.Fatal("point after the summary")
			}
			if _, dup := points[e.Point.GetIndex()]; dup {
				t.Fatalf("point %d sent twice", e.Point.GetIndex())
			}
			points[e.Point.GetIndex()] = e.Point
		case *pb.SweepResponse_Summary:
			if i != len(msgs)-1 {
				t.Fatal("summary is not the last message")
			}
			sum = e.Summary
		}
	}
	if sum == nil {
		t.Fatal("no summary")
	}
	return points, sum, nil
}

// directPoint runs grid point (i, j) of sweepAxes by hand with the engine.
func directPoint(t *testing.T, base *pb.Scenario, step, delay float64, seed uint64) *pb.RunReport {
	t.Helper()
	sc := ScenarioFromProto(base)
	if err := loop.SetPath(&sc, "inner_loop.step_db", step); err != nil {
		t.Fatal(err)
	}
	if err := loop.SetPath(&sc, "inner_loop.feedback_delay_slots", delay); err != nil {
		t.Fatal(err)
	}
	sc.Run.Seed = seed
	rep, err := loop.Run(context.Background(), sc, loop.RunOptions{})
	if err != nil {
		t.Fatal(err)
	}
	return ReportToProto(rep)
}

// aggregateOnly keeps what a non-detailed sweep point carries.
func aggregateOnly(r *pb.RunReport) *pb.RunReport {
	r = stripTiming(r)
	r.Users, r.DistanceBins, r.NormalisedScenario, r.Traces = nil, nil, nil, nil
	return r
}

func TestSweepGridAndDeterminism(t *testing.T) {
	base := sweepBase(t)
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{})
			points, sum, err := sweep(t, env, &pb.SweepRequest{Base: base, Axes: sweepAxes(), SeedMode: pb.SeedMode_SEED_MODE_COMMON})
			if err != nil {
				t.Fatal(err)
			}
			if len(points) != 6 || sum.GetGridPoints() != 6 || sum.GetPointsComputed() != 6 || sum.GetSimulatedUserSlots() != 6*4*1500 {
				t.Fatalf("%d points, summary %v", len(points), sum)
			}
			steps, delays := sweepAxes()[0].GetValues(), sweepAxes()[1].GetValues()
			for idx, p := range points {
				// Row-major, last axis fastest.
				step, delay := steps[idx/2], delays[idx%2]
				if c := p.GetCoordinates(); len(c) != 2 || c[0] != step || c[1] != delay {
					t.Errorf("point %d coordinates %v, want [%v %v]", idx, c, step, delay)
				}
				if p.GetSeed() != 7 {
					t.Errorf("point %d seed %d, want the common seed 7", idx, p.GetSeed())
				}
				if p.GetReport().GetUsers() != nil {
					t.Errorf("non-detailed point %d carries per-user figures", idx)
				}
			}
			for _, idx := range []int64{0, 5} {
				want := aggregateOnly(directPoint(t, base, steps[idx/2], delays[idx%2], 7))
				if got := stripTiming(points[idx].GetReport()); !proto.Equal(got, want) {
					t.Errorf("point %d differs from a direct engine run:\ngot  %v\nwant %v", idx, got.GetAggregate(), want.GetAggregate())
				}
			}
			// A subset, in any order, gives the same points (a retried or
			// resumed sweep).
			sub, sum2, err := sweep(t, env, &pb.SweepRequest{Base: base, Axes: sweepAxes(), SeedMode: pb.SeedMode_SEED_MODE_COMMON,
				PointIndices: []int64{4, 1}, Detailed: true})
			if err != nil {
				t.Fatal(err)
			}
			if len(sub) != 2 || sum2.GetPointsComputed() != 2 || sum2.GetGridPoints() != 6 {
				t.Fatalf("subset: %d points, summary %v", len(sub), sum2)
			}
			for _, idx := range []int64{4, 1} {
				if !proto.Equal(aggregateOnly(sub[idx].GetReport()), stripTiming(points[idx].GetReport())) {
					t.Errorf("retried point %d differs", idx)
				}
				if len(sub[idx].GetReport().GetUsers()) != 4 || sub[idx].GetReport().GetNormalisedScenario() == nil {
					t.Errorf("detailed point %d lacks per-user figures or the scenario", idx)
				}
			}
		})
	}
}

func TestSweepPerPointSeeds(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	base := sweepBase(t)
	axes := []*pb.SweepAxis{{Path: "groups[0].speeds[0].speed_kmh", Values: []float64{3, 3, 3}}}
	points, _, err := sweep(t, env, &pb.SweepRequest{Base: base, Axes: axes, SeedMode: pb.SeedMode_SEED_MODE_PER_POINT})
	if err != nil {
		t.Fatal(err)
	}
	seen := map[uint64]bool{}
	for idx, p := range points {
		// The documented derivation: SplitMix64(seed + (i+1)·0x9E3779B97F4A7C15).
		z := uint64(7) + uint64(idx+1)*0x9E3779B97F4A7C15
		z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9
		z = (z ^ (z >> 27)) * 0x94D049BB133111EB
		if want := z ^ (z >> 31); p.GetSeed() != want {
			t.Errorf("point %d seed %d, want %d", idx, p.GetSeed(), want)
		}
		seen[p.GetSeed()] = true
	}
	if len(seen) != 3 {
		t.Errorf("per-point seeds not distinct: %v", seen)
	}
	// Identical scenarios with different seeds give different figures.
	a := points[0].GetReport().GetAggregate().GetSirErrorStdDb().GetValue()
	b := points[1].GetReport().GetAggregate().GetSirErrorStdDb().GetValue()
	if a == b {
		t.Errorf("points 0 and 1 have the same SIR error std %v despite different seeds", a)
	}
}

func TestSweepBadInput(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{MaxCost: 2e6})
	req := func(f func(*pb.SweepRequest)) *pb.SweepRequest {
		r := &pb.SweepRequest{Base: sweepBase(t), Axes: sweepAxes(), SeedMode: pb.SeedMode_SEED_MODE_COMMON}
		f(r)
		return r
	}
	cases := []struct {
		name  string
		req   *pb.SweepRequest
		code  codes.Code
		field string
	}{
		{"seed mode unspecified", req(func(r *pb.SweepRequest) { r.SeedMode = 0 }), codes.InvalidArgument, "seed_mode"},
		{"unknown path", req(func(r *pb.SweepRequest) { r.Axes[0].Path = "inner_loop.nope" }), codes.InvalidArgument, "axes[0].path"},
		{"enum path", req(func(r *pb.SweepRequest) { r.Axes[1].Path = "inner_loop.mode" }), codes.InvalidArgument, "axes[1].path"},
		{"index out of range", req(func(r *pb.SweepRequest) { r.Axes[0].Path = "groups[3].count" }), codes.InvalidArgument, "axes[0].path"},
		{"value out of range", req(func(r *pb.SweepRequest) { r.Axes[0].Values[1] = 50 }), codes.InvalidArgument, "axes[0].values[1]"},
		{"non-integral value", req(func(r *pb.SweepRequest) { r.Axes[1].Values[1] = 1.5 }), codes.InvalidArgument, "axes[1].values[1]"},
		{"Doppler over half the rate at one point", req(func(r *pb.SweepRequest) {
			r.Axes[0] = &pb.SweepAxis{Path: "groups[0].speeds[0].speed_kmh", Values: []float64{3, 450}}
		}), codes.InvalidArgument, "axes[0].values[1]"},
		{"empty values", req(func(r *pb.SweepRequest) { r.Axes[0].Values = nil }), codes.InvalidArgument, "axes[0].values"},
		{"no axes", req(func(r *pb.SweepRequest) { r.Axes = nil }), codes.InvalidArgument, "axes"},
		{"point index past the grid", req(func(r *pb.SweepRequest) { r.PointIndices = []int64{6} }), codes.InvalidArgument, "point_indices[0]"},
		{"duplicate point index", req(func(r *pb.SweepRequest) { r.PointIndices = []int64{1, 1} }), codes.InvalidArgument, "point_indices"},
		{"bad base", req(func(r *pb.SweepRequest) { r.Base.InnerLoop.Mode = 99 }), codes.InvalidArgument, "base.inner_loop.mode"},
		{"cost over the bound", req(func(r *pb.SweepRequest) {
			// 100 × 2 points × 24 000 tap-slots = 4.8e6 > 2e6.
			r.Axes[0].Values = make([]float64, 100)
			for k := range r.Axes[0].Values {
				r.Axes[0].Values[k] = 1
			}
		}),
			codes.ResourceExhausted, ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, _, err := sweep(t, env, c.req)
			if c.code == codes.InvalidArgument {
				wantInvalid(t, err, c.field)
				return
			}
			wantCode(t, err, c.code)
		})
	}
}

// TestSweepCancellationStopsPromptly cancels a sweep of many short points
// after its first point and checks the work, not the wall time (the
// machine may be busy): once the server sees the cancel no point starts,
// so the points it started exceed those it handed over by at most one per
// worker, and the grid is not run to its end. The server's own account is
// its "sweep stopped" log line.
func TestSweepCancellationStopsPromptly(t *testing.T) {
	vals := make([]float64, 256)
	for i := range vals {
		vals[i] = 0.05 + 0.01*float64(i)
	}
	for _, par := range []int{1, 2} {
		env := startEnv(t, viaLoopback, Config{MaxConcurrentRuns: 1, QueueLength: -1, EngineParallelism: par})
		ctx, cancel := context.WithCancel(context.Background())
		st, err := env.sim.Sweep(ctx, &pb.SweepRequest{Base: sweepBase(t), SeedMode: pb.SeedMode_SEED_MODE_PER_POINT,
			Axes: []*pb.SweepAxis{{Path: "inner_loop.step_db", Values: vals}}})
		if err != nil {
			t.Fatal(err)
		}
		if _, err := st.Recv(); err != nil {
			t.Fatal(err)
		}
		cancel()
		for {
			if _, err = st.Recv(); err != nil {
				break
			}
		}
		wantCode(t, err, codes.Canceled)
		waitSlotFree(t, env, time.Now())
		var started, computed int64 = -1, -1
		for _, line := range strings.Split(env.logs.String(), "\n") {
			var rec struct {
				Msg      string `json:"msg"`
				Started  int64  `json:"points_started"`
				Computed int64  `json:"points_computed"`
			}
			if json.Unmarshal([]byte(line), &rec) == nil && rec.Msg == "sweep stopped" {
				started, computed = rec.Started, rec.Computed
			}
		}
		if started < 0 {
			t.Fatalf("parallelism %d: no \"sweep stopped\" log line", par)
		}
		if started-computed > int64(par) || started >= int64(len(vals)) {
			t.Errorf("parallelism %d: %d points started, %d handed over, of %d; want at most %d abandoned and the grid not finished",
				par, started, computed, len(vals), par)
		}
		t.Logf("parallelism %d: %d points started, %d handed over before the server saw the cancel", par, started, computed)
	}
}

// TestSweepAndTuneNamedAndGroupAxes sweeps an enum field by name and a
// group-level speed (every speed of group 0), and tunes over the enum by
// name: the points and candidates carry the names and labels that say what
// was varied, and the runs use those settings.
func TestSweepAndTuneNamedAndGroupAxes(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	base := tinyTuneBase(t)
	axes := []*pb.SweepAxis{
		{Path: "inner_loop.command", Names: []string{"COMMAND_FIXED_STEP", "COMMAND_ADAPTIVE"}},
		{Path: "groups[0].speed_kmh", Values: []float64{3, 120}},
	}
	points, sum, err := sweep(t, env, &pb.SweepRequest{Base: base, Axes: axes, SeedMode: pb.SeedMode_SEED_MODE_COMMON, Detailed: true})
	if err != nil {
		t.Fatal(err)
	}
	if sum.GetPointsComputed() != 4 {
		t.Fatalf("%d points computed, want 4", sum.GetPointsComputed())
	}
	p := points[3]
	if got := p.GetLabel(); got != "command=COMMAND_ADAPTIVE, groups[0].speed_kmh (every speed)=120" {
		t.Errorf("label %q", got)
	}
	if n := p.GetCoordinateNames(); len(n) != 2 || n[0] != "COMMAND_ADAPTIVE" || n[1] != "" {
		t.Errorf("coordinate names %q", n)
	}
	if c := p.GetCoordinates(); len(c) != 2 || c[0] != 1 || c[1] != 120 {
		t.Errorf("coordinates %v, want [1 120] (the name's position, the speed)", c)
	}
	ns := p.GetReport().GetNormalisedScenario()
	if ns.GetInnerLoop().GetCommand() != pb.Command_COMMAND_ADAPTIVE {
		t.Errorf("point 3 ran command %v", ns.GetInnerLoop().GetCommand())
	}
	for _, s := range ns.GetGroups()[0].GetSpeeds() {
		if s.GetSpeedKmh() != 120 {
			t.Errorf("point 3 speeds %v, want every speed 120", ns.GetGroups()[0].GetSpeeds())
		}
	}
	_, rec, err := tuneCall(context.Background(), env, &pb.TuneRequest{Base: base, Axes: axes[:1],
		Objective: &pb.Objective{Kind: pb.ObjectiveKind_OBJECTIVE_KIND_MIN_SIR_ERROR_STD},
		Budget:    &pb.TuneBudget{MaxReplications: 2}, SkipBaseline: true})
	if err != nil {
		t.Fatal(err)
	}
	var texts []string
	for _, c := range rec.GetCandidates() {
		texts = append(texts, c.GetCoords()[0].GetText())
	}
	if strings.Join(texts, ",") != "COMMAND_FIXED_STEP,COMMAND_ADAPTIVE" {
		t.Errorf("tune candidates %v, want the two commands by name", texts)
	}
	// A name the enum does not have is rejected at its place in the axis.
	_, _, err = sweep(t, env, &pb.SweepRequest{Base: base, SeedMode: pb.SeedMode_SEED_MODE_COMMON,
		Axes: []*pb.SweepAxis{{Path: "inner_loop.command", Names: []string{"COMMAND_FIXED_STEP", "COMMAND_BOGUS"}}}})
	wantInvalid(t, err, "axes[0].names[1]")
}
