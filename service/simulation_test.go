package service

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"buf.build/gen/go/bufbuild/protovalidate/protocolbuffers/go/buf/validate"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// smallScenario is testdata/scenarios/small.json (4 users, 3000 slots, 2
// replications).
func smallScenario(t testing.TB) *pb.Scenario { return readScenario(t, "small.json") }

// simulate runs a Simulate call and returns the progress events and the
// report.
func simulate(ctx context.Context, env *testEnv, req *pb.SimulateRequest) ([]*pb.Progress, *pb.RunReport, error) {
	st, err := env.sim.Simulate(ctx, req)
	if err != nil {
		return nil, nil, err
	}
	msgs, err := drain(st.Recv)
	if err != nil {
		return nil, nil, err
	}
	var prog []*pb.Progress
	var rep *pb.RunReport
	for i, m := range msgs {
		switch e := m.GetEvent().(type) {
		case *pb.SimulateResponse_Progress:
			if rep != nil {
				return nil, nil, fmt.Errorf("progress after the report")
			}
			prog = append(prog, e.Progress)
		case *pb.SimulateResponse_Report:
			if i != len(msgs)-1 {
				return nil, nil, fmt.Errorf("report is message %d of %d, not the last", i, len(msgs))
			}
			rep = e.Report
		}
	}
	if rep == nil {
		return nil, nil, fmt.Errorf("stream ended without a report")
	}
	return prog, rep, nil
}

// stripTiming zeroes the wall-clock fields, the only ones that may differ
// between identical runs.
func stripTiming(r *pb.RunReport) *pb.RunReport {
	r = proto.Clone(r).(*pb.RunReport)
	r.WallTimeS, r.UserSlotsPerS = 0, 0
	return r
}

func TestSimulateMatchesDirectRun(t *testing.T) {
	sc := smallScenario(t)
	direct, err := loop.Run(context.Background(), ScenarioFromProto(sc), loop.RunOptions{})
	if err != nil {
		t.Fatal(err)
	}
	want := stripTiming(ReportToProto(direct))
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{})
			prog, rep, err := simulate(context.Background(), env, &pb.SimulateRequest{Scenario: sc, ProgressIntervalMs: 1})
			if err != nil {
				t.Fatal(err)
			}
			if !proto.Equal(stripTiming(rep), want) {
				t.Fatalf("Simulate report differs from loop.Run:\ngot  %v\nwant %v", stripTiming(rep).GetAggregate(), want.GetAggregate())
			}
			if rep.GetSeed() != 7 || rep.GetEngineVersion() != loop.EngineVersion || len(rep.GetUsers()) != 4 ||
				len(rep.GetDistanceBins()) != 2 || rep.GetNormalisedScenario() == nil {
				t.Errorf("report header: seed %d, version %q, %d users, %d bins", rep.GetSeed(), rep.GetEngineVersion(),
					len(rep.GetUsers()), len(rep.GetDistanceBins()))
			}
			if len(prog) == 0 || prog[len(prog)-1].GetFractionDone() != 1 {
				t.Errorf("progress events %v: want at least the final one at fraction 1", prog)
			}
			for i := 1; i < len(prog); i++ {
				if prog[i].GetFractionDone() < prog[i-1].GetFractionDone() {
					t.Errorf("progress went backwards: %v then %v", prog[i-1], prog[i])
				}
			}
		})
	}
}

func TestSimulateTraces(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	_, rep, err := simulate(context.Background(), env, &pb.SimulateRequest{
		Scenario: smallScenario(t), Traces: &pb.TraceOptions{DecimationSlots: 100, Users: []int32{1, 3}}})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.GetTraces()) != 2 || rep.GetTraces()[0].GetUser() != 1 || rep.GetTraces()[1].GetUser() != 3 {
		t.Fatalf("traces: %v", rep.GetTraces())
	}
	tr := rep.GetTraces()[0]
	// 3000 slots at one sample per 100 slots: 30 samples (always-on users).
	if n := len(tr.GetSlots()); n != 30 || len(tr.GetSirDb()) != n || len(tr.GetTxPowerDbm()) != n ||
		len(tr.GetTargetDb()) != n || len(tr.GetChannelGainDb()) != n {
		t.Errorf("trace lengths: slots %d sir %d power %d", n, len(tr.GetSirDb()), len(tr.GetTxPowerDbm()))
	}
	_, rep, err = simulate(context.Background(), env, &pb.SimulateRequest{
		Scenario: smallScenario(t), Traces: &pb.TraceOptions{DecimationSlots: 1000}})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.GetTraces()) != 4 {
		t.Errorf("empty user list traced %d users, want all 4", len(rep.GetTraces()))
	}
}

// mutate returns a SimulateRequest for the small scenario changed by f.
func mutate(t *testing.T, f func(*pb.Scenario)) *pb.SimulateRequest {
	sc := smallScenario(t)
	f(sc)
	return &pb.SimulateRequest{Scenario: sc}
}

func TestSimulateBadInput(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	cases := []struct {
		name  string
		req   *pb.SimulateRequest
		field string
	}{
		// Unset enums take their defaults (TestSimulateDefaults); values
		// that are not defined are rejected.
		{"placement undefined", mutate(t, func(s *pb.Scenario) { s.Groups[0].Placement = 99 }), "scenario.groups[0].placement"},
		{"placement unset without distances", mutate(t, func(s *pb.Scenario) {
			s.Groups[0].Placement, s.Groups[0].MinDistanceM, s.Groups[0].MaxDistanceM = 0, 0, 0
		}), "scenario.groups[0].placement"},
		{"generator undefined", mutate(t, func(s *pb.Scenario) { s.Groups[0].Generator = 99 }), "scenario.groups[0].generator"},
		{"path-loss model undefined", mutate(t, func(s *pb.Scenario) { s.Groups[0].PathLoss.Model = 99 }), "scenario.groups[0].path_loss.model"},
		{"command undefined", mutate(t, func(s *pb.Scenario) { s.InnerLoop.Command = 99 }), "scenario.inner_loop.command"},
		{"initial power undefined", mutate(t, func(s *pb.Scenario) { s.InnerLoop.InitialPower = 99 }), "scenario.inner_loop.initial_power"},
		{"link kind undefined", mutate(t, func(s *pb.Scenario) { s.Link.Kind = 99 }), "scenario.link.kind"},
		{"effective SIR undefined", mutate(t, func(s *pb.Scenario) { s.Link.EffectiveSir = 99 }), "scenario.link.effective_sir"},
		{"RAKE finger model undefined", mutate(t, func(s *pb.Scenario) { s.Receiver.RakeFingers = 99 }), "scenario.receiver.rake_fingers"},
		{"enum value out of range", mutate(t, func(s *pb.Scenario) { s.InnerLoop.Mode = 99 }), "scenario.inner_loop.mode"},
		{"both profile and taps", mutate(t, func(s *pb.Scenario) { s.Groups[0].CustomTaps = []*pb.Tap{{}} }), "scenario.groups[0]"},
		{"taps not sorted", mutate(t, func(s *pb.Scenario) {
			s.Groups[0].Profile = ""
			s.Groups[0].CustomTaps = []*pb.Tap{{DelayNs: 100}, {DelayNs: 100}}
		}), "scenario.groups[0].custom_taps[1].delay_ns"},
		{"Doppler above half the update rate", mutate(t, func(s *pb.Scenario) { s.Groups[0].Speeds[0].SpeedKmh = 500 }), "scenario.groups[0].speeds[0].speed_kmh"},
		{"Doppler at a low update rate", mutate(t, func(s *pb.Scenario) { s.InnerLoop.UpdateRateHz = 10 }), "scenario.groups[0].speeds[0].speed_kmh"},
		{"unknown profile", mutate(t, func(s *pb.Scenario) { s.Groups[0].Profile = "XYZ" }), "scenario.groups[0].profile"},
		{"both slots and duration", mutate(t, func(s *pb.Scenario) { s.Run.DurationS = 1 }), "scenario.run"},
		{"warm-up past the run", mutate(t, func(s *pb.Scenario) { s.Run.WarmupSlots = 3000 }), "scenario.run.warmup_slots"},
		{"no groups", mutate(t, func(s *pb.Scenario) { s.Groups = nil }), "scenario.groups"},
		{"missing scenario", &pb.SimulateRequest{}, "scenario"},
		{"traced user out of range", &pb.SimulateRequest{Scenario: smallScenario(t), Traces: &pb.TraceOptions{DecimationSlots: 1, Users: []int32{4}}}, "traces.users[0]"},
		{"traces too large", &pb.SimulateRequest{Scenario: mutate(t, func(s *pb.Scenario) { s.Run.Slots = 1e6 }).Scenario,
			Traces: &pb.TraceOptions{DecimationSlots: 1}}, "traces.decimation_slots"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, _, err := simulate(context.Background(), env, c.req)
			wantInvalid(t, err, c.field)
		})
	}
}

// TestSimulateAllViolationsAtOnce checks that every broken rule is listed
// in one reply, from both the proto rules and the engine's rules.
func TestSimulateAllViolationsAtOnce(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	req := mutate(t, func(s *pb.Scenario) {
		s.InnerLoop.Mode = 99                     // proto rule
		s.Receiver.NoiseFigureDb = 31             // proto rule
		s.Groups[0].Speeds[0].SpeedKmh = 600      // engine rule (Doppler)
		s.Groups[0].MinDistanceM = 700            // engine rule (min > max)
		s.OuterLoop.BlerTarget = 2                // proto rule
		s.Link.Table = []*pb.LinkPoint{{Bler: 2}} // proto rule on a list item
	})
	_, _, err := simulate(context.Background(), env, req)
	st := wantCode(t, err, codes.InvalidArgument)
	got := badRequestFields(st)
	for _, f := range []string{"scenario.inner_loop.mode", "scenario.receiver.noise_figure_db",
		"scenario.groups[0].speeds[0].speed_kmh", "scenario.outer_loop.bler_target", "scenario.link.table[0].bler"} {
		if _, ok := got[f]; !ok {
			t.Errorf("violations lack %s: %v", f, got)
		}
	}
	if len(got) < 5 {
		t.Errorf("only %d violations listed: %v", len(got), got)
	}
}

// TestSimulateEveryRange sets every numeric Scenario field that has a
// range rule in the .proto, one at a time, just outside its range, and
// expects INVALID_ARGUMENT naming exactly that field.
func TestSimulateEveryRange(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	base := smallScenario(t)
	base.Link.Table = []*pb.LinkPoint{{SirDb: 0, Bler: 0.5}}
	base.Groups[0].DistancesM = []float64{100}
	base.InnerLoop.LevelsDb = []float64{1}
	base.InnerLoop.ThresholdsDb = []float64{1}
	tested := 0
	var walk func(m protoreflect.Message, path string)
	walk = func(m protoreflect.Message, path string) {
		fields := m.Descriptor().Fields()
		for i := range fields.Len() {
			fd := fields.Get(i)
			name := path + string(fd.Name())
			if fd.Message() != nil {
				if fd.IsList() {
					l := m.Get(fd).List()
					for j := range l.Len() {
						walk(l.Get(j).Message(), fmt.Sprintf("%s[%d].", name, j))
					}
				} else if m.Has(fd) {
					walk(m.Get(fd).Message(), name+".")
				}
				continue
			}
			rules, _ := proto.GetExtension(fd.Options(), validate.E_Field).(*validate.FieldRules)
			if rules == nil {
				continue
			}
			if fd.IsList() {
				if rules.GetRepeated().GetItems() == nil || m.Get(fd).List().Len() == 0 {
					continue
				}
				for _, bad := range outside(rules.GetRepeated().GetItems()) {
					tested++
					runOutside(t, env, base, name+"[0]", bad)
				}
				continue
			}
			for _, bad := range outside(rules) {
				tested++
				runOutside(t, env, base, name, bad)
			}
		}
	}
	walk(base.ProtoReflect(), "")
	t.Logf("%d out-of-range cases checked", tested)
	// Every bounded numeric field of Scenario has a lower and an upper
	// bound; at least 60 such checks exist.
	if tested < 60 {
		t.Errorf("only %d out-of-range cases found", tested)
	}
}

// outside returns values just below the lower bound and just above the
// upper bound of a numeric rule (skipping 0 where zero means "default").
func outside(r *validate.FieldRules) []float64 {
	var lo, hi *float64
	switch {
	case r.GetDouble() != nil:
		d := r.GetDouble()
		if d.HasGt() {
			lo = ptr(d.GetGt())
		} else if d.HasGte() {
			lo = ptr(math.Nextafter(d.GetGte(), math.Inf(-1)))
		}
		if d.HasLt() {
			hi = ptr(d.GetLt())
		} else if d.HasLte() {
			hi = ptr(math.Nextafter(d.GetLte(), math.Inf(1)))
		}
	case r.GetInt32() != nil:
		d := r.GetInt32()
		if d.HasGt() {
			lo = ptr(float64(d.GetGt()))
		} else if d.HasGte() {
			lo = ptr(float64(d.GetGte() - 1))
		}
		if d.HasLt() {
			hi = ptr(float64(d.GetLt()))
		} else if d.HasLte() {
			hi = ptr(float64(d.GetLte() + 1))
		}
	case r.GetInt64() != nil:
		d := r.GetInt64()
		if d.HasGte() {
			lo = ptr(float64(d.GetGte() - 1))
		}
		if d.HasLte() {
			hi = ptr(float64(d.GetLte() + 1))
		}
	}
	var out []float64
	for _, v := range []*float64{lo, hi} {
		if v == nil {
			continue
		}
		x := *v
		if x == 0 && r.GetIgnore() == validate.Ignore_IGNORE_IF_ZERO_VALUE {
			x = -1
		}
		out = append(out, x)
	}
	return out
}

func ptr(x float64) *float64 { return &x }

// runOutside sets the field at path (relative to the scenario) to bad and
// checks the reply names it.
func runOutside(t *testing.T, env *testEnv, base *pb.Scenario, path string, bad float64) {
	t.Helper()
	sc := proto.Clone(base).(*pb.Scenario)
	setProtoPath(t, sc.ProtoReflect(), path, bad)
	_, _, err := simulate(context.Background(), env, &pb.SimulateRequest{Scenario: sc})
	if err == nil {
		t.Errorf("%s = %g accepted", path, bad)
		return
	}
	st := wantCode(t, err, codes.InvalidArgument)
	if _, ok := badRequestFields(st)["scenario."+path]; !ok {
		t.Errorf("%s = %g: violations %v do not name it", path, bad, badRequestFields(st))
	}
}

// setProtoPath sets a numeric field by a "a.b[0].c" path.
func setProtoPath(t *testing.T, m protoreflect.Message, path string, v float64) {
	t.Helper()
	parts := strings.Split(path, ".")
	for i, p := range parts {
		name, idx := p, -1
		if j := strings.IndexByte(p, '['); j >= 0 {
			name = p[:j]
			fmt.Sscanf(p[j:], "[%d]", &idx)
		}
		fd := m.Descriptor().Fields().ByName(protoreflect.Name(name))
		last := i == len(parts)-1
		if !last {
			if idx >= 0 {
				m = m.Mutable(fd).List().Get(idx).Message()
			} else {
				m = m.Mutable(fd).Message()
			}
			continue
		}
		var val protoreflect.Value
		switch fd.Kind() {
		case protoreflect.DoubleKind:
			val = protoreflect.ValueOfFloat64(v)
		case protoreflect.Int32Kind:
			val = protoreflect.ValueOfInt32(int32(v))
		case protoreflect.Int64Kind:
			val = protoreflect.ValueOfInt64(int64(v))
		default:
			t.Fatalf("setProtoPath %s: kind %v", path, fd.Kind())
		}
		if idx >= 0 {
			m.Mutable(fd).List().Set(idx, val)
		} else {
			m.Set(fd, val)
		}
	}
}

func TestSimulateCostBound(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{MaxCost: 1000})
	_, _, err := simulate(context.Background(), env, &pb.SimulateRequest{Scenario: smallScenario(t)})
	st := wantCode(t, err, codes.ResourceExhausted)
	// 4 users × 3000 slots × 2 fingers (PEDA's 4 taps resolve into 2 paths
	// at 3.84 Mchip/s) × 2 replications = 48000.
	if !strings.Contains(st.Message(), "max_cost = 1000") || !strings.Contains(st.Message(), "48000") {
		t.Errorf("message %q does not name the bound and the cost", st.Message())
	}
}

// longScenario is the canonical scenario (64 users, 90 000 slots): many
// runs of it (Tune, Capacity) are seconds of work, long enough to cancel
// mid-search.
func longScenario() *pb.Scenario {
	return ScenarioToProto(loop.CanonicalScenario())
}

// longRun is the canonical scenario run 40 times as long (3.6 M slots,
// 230 M user-slots): seconds of work for one Simulate call even at the
// engine's best speed (about 75 M user-slots/s on 2 cores), so a cancel
// or a deadline of a few hundred milliseconds lands mid-run. (The
// canonical run alone ends in about 80 ms, before the 150 ms deadline of
// TestSimulateDeadlineStopsPromptly.)
func longRun() *pb.Scenario {
	sc := loop.CanonicalScenario()
	sc.Run.Slots *= 40
	return ScenarioToProto(sc)
}

// waitSlotFree waits until a server with one run slot and no queue admits
// a new (tiny) call and returns how long after t0 that was. It asserts no
// speed: the 2-minute limit only keeps a call that never ends from hanging
// the suite.
func waitSlotFree(t *testing.T, env *testEnv, t0 time.Time) time.Duration {
	t.Helper()
	for {
		err := callGains(context.Background(), env.channel, smallGains())
		if err == nil {
			return time.Since(t0)
		}
		wantCode(t, err, codes.ResourceExhausted)
		if time.Since(t0) > 2*time.Minute {
			t.Fatal("run slot not freed within 2 min of the cancel")
		}
		time.Sleep(time.Millisecond)
	}
}

// waitSlotTaken waits until the server's only run slot is taken.
func waitSlotTaken(t *testing.T, env *testEnv) {
	t.Helper()
	deadline := time.Now().Add(2 * time.Minute)
	for len(env.srv.runs.slots) == 0 {
		if time.Now().After(deadline) {
			t.Fatal("the call never took the run slot")
		}
		time.Sleep(time.Millisecond)
	}
}

// simulatedUserSlots reads the server's counter of simulated user-slots
// from its metrics registry.
func simulatedUserSlots(t *testing.T, env *testEnv) float64 {
	t.Helper()
	mfs, err := env.srv.metrics.registry.Gather()
	if err != nil {
		t.Fatal(err)
	}
	for _, mf := range mfs {
		if strings.HasSuffix(mf.GetName(), "simulated_user_slots_total") {
			return mf.GetMetric()[0].GetCounter().GetValue()
		}
	}
	t.Fatal("no simulated user-slots counter in the registry")
	return 0
}

// stoppedUnfinished checks, by work rather than wall time (the machine
// may be busy), that a cancelled or timed-out run of the long scenario
// stopped: its slot is freed and the server counted no finished run
// (a run that ignored its context would have finished and been counted:
// 64 users × 90 000 slots).
func stoppedUnfinished(t *testing.T, env *testEnv, before float64) {
	t.Helper()
	waitSlotFree(t, env, time.Now())
	if got := simulatedUserSlots(t, env); got != before {
		t.Errorf("the server counted %g user-slots of a run that was cancelled", got-before)
	}
}

func TestSimulateCancellationStopsPromptly(t *testing.T) {
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{MaxConcurrentRuns: 1, QueueLength: -1})
			before := simulatedUserSlots(t, env)
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			st, err := env.sim.Simulate(ctx, &pb.SimulateRequest{Scenario: longRun(), ProgressIntervalMs: 20})
			if err != nil {
				t.Fatal(err)
			}
			if _, err := st.Recv(); err != nil { // a progress event: the run is under way
				t.Fatal(err)
			}
			cancel()
			stoppedUnfinished(t, env, before)
		})
	}
}

func TestSimulateDeadlineStopsPromptly(t *testing.T) {
	env := startEnv(t, viaLoopback, Config{MaxConcurrentRuns: 1, QueueLength: -1})
	before := simulatedUserSlots(t, env)
	ctx, cancel := context.WithTimeout(context.Background(), 150*time.Millisecond)
	defer cancel()
	_, _, err := simulate(ctx, env, &pb.SimulateRequest{Scenario: longRun()})
	wantCode(t, err, codes.DeadlineExceeded)
	stoppedUnfinished(t, env, before)
}

// promptly runs a measurement of how long work goes on after a cancel or
// deadline up to three times and passes when one of them is within 100 ms.
// Kept for TestStreamGainsCancelPrompt (channel_test.go); Simulate and
// Sweep assert promptness by work instead.
func promptly(t *testing.T, what string, measure func() time.Duration) {
	t.Helper()
	var got []time.Duration
	for range 3 {
		d := measure()
		got = append(got, d)
		if d <= 100*time.Millisecond {
			t.Logf("%s: work stopped and run slot freed %v after the cancel (attempts %v)", what, d, got)
			return
		}
	}
	t.Errorf("%s: work went on %v after the cancel, want <= 100 ms", what, got)
}

// TestServerCapsCallDuration checks that MaxCallDuration cuts a call that
// has no deadline of its own.
func TestServerCapsCallDuration(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{MaxCallDuration: 100 * time.Millisecond})
	_, _, err := simulate(context.Background(), env, &pb.SimulateRequest{Scenario: longRun()})
	wantCode(t, err, codes.DeadlineExceeded)
}

// TestViolationsCapped replays the 1.9 MB request of NaN distances whose
// 262 000 violations once broke the connection: the rejection lists the
// first MaxViolations and one entry counting the rest, and stays small.
// The short suite sends 4 groups (16 384 violations), the full one 64
// (262 144).
func TestViolationsCapped(t *testing.T) {
	env := startEnv(t, viaLoopback, Config{})
	sc := smallScenario(t)
	g := sc.Groups[0]
	sc.Groups = nil
	groups := 64
	if testing.Short() {
		groups = 4
	}
	for range groups {
		gg := proto.Clone(g).(*pb.UserGroup)
		gg.Count = 4096
		gg.Placement = pb.Placement_PLACEMENT_EXPLICIT
		gg.DistancesM = make([]float64, 4096)
		for i := range gg.DistancesM {
			gg.DistancesM[i] = math.NaN()
		}
		sc.Groups = append(sc.Groups, gg)
	}
	req := &pb.SimulateRequest{Scenario: sc}
	_, _, err := simulate(context.Background(), env, req)
	st := wantCode(t, err, codes.InvalidArgument)
	var n int
	var last string
	for _, d := range st.Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			n = len(br.GetFieldViolations())
			last = br.GetFieldViolations()[n-1].GetDescription()
		}
	}
	if n != MaxViolations+1 || !strings.Contains(last, "more violations not listed") {
		t.Errorf("%d violations, last %q; want %d and a count of the rest", n, last, MaxViolations+1)
	}
	if size := proto.Size(st.Proto()); size > 64<<10 {
		t.Errorf("the rejection of a %d-byte request is %d bytes, want <= 64 KiB", proto.Size(req), size)
	}
	t.Logf("request %d bytes, rejection %d bytes, last entry %q", proto.Size(req), proto.Size(st.Proto()), last)
}
