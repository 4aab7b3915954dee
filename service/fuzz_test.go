package service

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// Request kinds of FuzzRequests.
const (
	fuzzGains = iota
	fuzzCheck
	fuzzSimulate
	fuzzSweep
	fuzzLockstepFirst // the bytes are the first Lockstep message
	fuzzLockstepSlot  // a valid configuration, then the bytes as a slot
	fuzzKinds
)

var fuzzKindNames = []string{"gains", "check", "simulate", "sweep", "lockstep-first", "lockstep-slot"}

// fuzzSeeds are valid requests of each kind (the seed corpus).
func fuzzSeeds(t testing.TB) map[string]struct {
	kind uint8
	msg  proto.Message
} {
	sc := smallScenario(t)
	ls := slotMsg(0, 3, 4)
	ls.GetSlot().Blocks = []*pb.BlockResult{{User: 1, Error: true}}
	seeds := map[string]struct {
		kind uint8
		msg  proto.Message
	}{
		"gains-eva":       {fuzzGains, &pb.StreamGainsRequest{Channel: eva(55.6), Links: 2, Samples: 100, Seed: 1}},
		"check-flat":      {fuzzCheck, &pb.CheckChannelRequest{Channel: &pb.ChannelSpec{DopplerHz: 50, SampleRateHz: 1500, Profile: "FLAT", Generator: pb.Generator_GENERATOR_DEFAULT}, Links: 8, DopplerPeriods: 20}},
		"simulate-small":  {fuzzSimulate, &pb.SimulateRequest{Scenario: sc, Traces: &pb.TraceOptions{DecimationSlots: 500}}},
		"sweep-small":     {fuzzSweep, &pb.SweepRequest{Base: sweepBase(t), Axes: sweepAxes()[:1], SeedMode: pb.SeedMode_SEED_MODE_COMMON}},
		"lockstep-config": {fuzzLockstepFirst, lockstepConfig(2)},
		"lockstep-slot":   {fuzzLockstepSlot, ls},
	}
	// Simulate seeds that reach the engine under the fuzz server's cost
	// bound (TestFuzzSeedsReachEngine checks it): the JSON scenarios of
	// testdata shrunk to a few users and slots, and small.json with each
	// inner-loop mode and command, the EESM effective SIR and the outer
	// loop off, so that mutations start from every engine path.
	for name, sc := range engineSeedScenarios(t) {
		seeds["simulate-"+name] = struct {
			kind uint8
			msg  proto.Message
		}{fuzzSimulate, &pb.SimulateRequest{Scenario: sc, Traces: &pb.TraceOptions{DecimationSlots: 50}}}
	}
	return seeds
}

// shrink cuts a scenario to at most two users per group and 400 slots with
// one replication.
func shrink(sc *pb.Scenario) *pb.Scenario {
	sc = proto.Clone(sc).(*pb.Scenario)
	for _, g := range sc.GetGroups() {
		if g.GetCount() > 2 {
			g.Count = 2
		}
	}
	if r := sc.GetRun(); r != nil {
		r.Slots, r.WarmupSlots, r.Replications, r.Batches = 400, 40, 1, 20
		r.DurationS = 0
	}
	return sc
}

func engineSeedScenarios(t testing.TB) map[string]*pb.Scenario {
	out := map[string]*pb.Scenario{}
	for _, name := range []string{"canonical", "dense_urban_macro", "motorway_120kmh"} {
		out[name] = shrink(readScenario(t, name+".json"))
	}
	base := shrink(smallScenario(t))
	variant := func(name string, edit func(sc *pb.Scenario)) {
		sc := proto.Clone(base).(*pb.Scenario)
		edit(sc)
		out[name] = sc
	}
	variant("fixed-power", func(sc *pb.Scenario) { sc.InnerLoop.Mode = pb.InnerMode_INNER_MODE_FIXED_POWER })
	variant("ideal", func(sc *pb.Scenario) { sc.InnerLoop.Mode = pb.InnerMode_INNER_MODE_IDEAL })
	variant("multi-level", func(sc *pb.Scenario) { sc.InnerLoop.Command = pb.Command_COMMAND_MULTI_LEVEL })
	variant("adaptive", func(sc *pb.Scenario) { sc.InnerLoop.Command = pb.Command_COMMAND_ADAPTIVE })
	variant("eesm", func(sc *pb.Scenario) { sc.Link.EffectiveSir = pb.EffectiveSir_EFFECTIVE_SIR_EESM })
	variant("outer-off", func(sc *pb.Scenario) { sc.OuterLoop.Enabled = false })
	return out
}

// fuzzConfig is the server configuration of FuzzRequests: a tiny cost
// bound so that each input runs in milliseconds.
func fuzzConfig() Config {
	return Config{MaxCost: 2e5, MaxCallDuration: 5 * time.Second, QueueTimeout: time.Second}
}

// TestFuzzSeedsReachEngine: every Simulate seed of the fuzz corpus is a
// valid request within the fuzz server's cost bound, so the fuzzer's
// mutations start inside the engine rather than at validation or
// admission.
func TestFuzzSeedsReachEngine(t *testing.T) {
	env := startEnv(t, viaBufconn, fuzzConfig())
	n := 0
	for name, s := range fuzzSeeds(t) {
		if s.kind != fuzzSimulate {
			continue
		}
		n++
		_, rep, err := simulate(context.Background(), env, s.msg.(*pb.SimulateRequest))
		if err != nil {
			t.Errorf("seed %s: %v", name, err)
			continue
		}
		if rep.GetSimulatedUserSlots() == 0 {
			t.Errorf("seed %s: no user-slots simulated", name)
		}
	}
	if n < 10 {
		t.Errorf("%d Simulate seeds, want at least 10", n)
	}
}

func fuzzCorpusDir() string { return filepath.Join("..", "testdata", "fuzz", "requests") }

// TestWriteFuzzCorpus rewrites testdata/fuzz/requests from fuzzSeeds when
// run with -update; otherwise it checks the files decode as their kind.
func TestWriteFuzzCorpus(t *testing.T) {
	seeds := fuzzSeeds(t)
	if *update {
		if err := os.MkdirAll(fuzzCorpusDir(), 0o755); err != nil {
			t.Fatal(err)
		}
		for name, s := range seeds {
			b, err := proto.Marshal(s.msg)
			if err != nil {
				t.Fatal(err)
			}
			path := filepath.Join(fuzzCorpusDir(), fmt.Sprintf("%d-%s.binpb", s.kind, name))
			if err := os.WriteFile(path, b, 0o644); err != nil {
				t.Fatal(err)
			}
		}
	}
	files := corpusFiles(t)
	if len(files) < len(seeds) {
		t.Fatalf("%d corpus files, want at least %d (run with -update)", len(files), len(seeds))
	}
}

// corpusFiles lists testdata/fuzz/requests: "<kind>-<name>.binpb".
func corpusFiles(t testing.TB) map[string]uint8 {
	t.Helper()
	paths, err := filepath.Glob(filepath.Join(fuzzCorpusDir(), "*.binpb"))
	if err != nil {
		t.Fatal(err)
	}
	out := map[string]uint8{}
	for _, p := range paths {
		base := filepath.Base(p)
		k, err := strconv.Atoi(base[:strings.IndexByte(base, '-')])
		if err != nil || k < 0 || k >= fuzzKinds {
			t.Fatalf("corpus file %s: bad kind prefix", p)
		}
		out[p] = uint8(k)
	}
	return out
}

// FuzzRequests decodes arbitrary bytes as each request type, and sends
// whatever decodes to a server with a tiny cost bound: every call must end
// with a proper status (OK, INVALID_ARGUMENT, RESOURCE_EXHAUSTED, ...), never
// INTERNAL (a recovered panic) or UNKNOWN, and the server must not crash.
func FuzzRequests(f *testing.F) {
	for name, s := range fuzzSeeds(f) {
		b, err := proto.Marshal(s.msg)
		if err != nil {
			f.Fatal(name, err)
		}
		f.Add(s.kind, b)
	}
	files := corpusFiles(f)
	paths := make([]string, 0, len(files))
	for p := range files {
		paths = append(paths, p)
	}
	sort.Strings(paths)
	for _, p := range paths {
		b, err := os.ReadFile(p)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(files[p], b)
	}
	f.Add(uint8(fuzzSimulate), []byte{0x0a, 0x00})
	f.Add(uint8(fuzzLockstepSlot), []byte{0x12, 0x02, 0x08, 0x05})

	env := startEnv(f, viaBufconn, fuzzConfig())
	f.Fuzz(func(t *testing.T, kind uint8, data []byte) {
		kind %= fuzzKinds
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		var err error
		switch kind {
		case fuzzGains:
			req := &pb.StreamGainsRequest{}
			if proto.Unmarshal(data, req) != nil {
				return
			}
			err = callGains(ctx, env.channel, req)
		case fuzzCheck:
			req := &pb.CheckChannelRequest{}
			if proto.Unmarshal(data, req) != nil {
				return
			}
			_, err = env.channel.CheckChannel(ctx, req)
		case fuzzSimulate:
			req := &pb.SimulateRequest{}
			if proto.Unmarshal(data, req) != nil {
				return
			}
			_, _, err = simulate(ctx, env, req)
			if err != nil && strings.Contains(err.Error(), "stream ended without a report") {
				t.Fatalf("Simulate ended cleanly without a report")
			}
		case fuzzSweep:
			req := &pb.SweepRequest{}
			if proto.Unmarshal(data, req) != nil {
				return
			}
			var st pb.SimulationService_SweepClient
			st, err = env.sim.Sweep(ctx, req)
			if err == nil {
				_, err = drain(st.Recv)
			}
		case fuzzLockstepFirst, fuzzLockstepSlot:
			var msgs []*pb.LockstepRequest
			if kind == fuzzLockstepFirst {
				req := &pb.LockstepRequest{}
				if proto.Unmarshal(data, req) != nil {
					return
				}
				msgs = []*pb.LockstepRequest{req, slotMsg(0, 1, 2)}
			} else {
				slot := &pb.LockstepSlot{}
				if proto.Unmarshal(data, slot) != nil {
					return
				}
				msgs = []*pb.LockstepRequest{lockstepConfig(2), {Message: &pb.LockstepRequest_Slot{Slot: slot}}}
			}
			err = lockstepCall(ctx, env, msgs)
		}
		if c := status.Code(err); c == codes.Internal || c == codes.Unknown {
			t.Fatalf("kind %s: %v", fuzzKindNames[kind], err)
		}
	})
}

// lockstepCall sends msgs on a Lockstep stream and reads it to the end.
func lockstepCall(ctx context.Context, env *testEnv, msgs []*pb.LockstepRequest) error {
	st, err := env.loop.Lockstep(ctx)
	if err != nil {
		return err
	}
	for _, m := range msgs {
		if st.Send(m) != nil {
			break
		}
	}
	_ = st.CloseSend()
	for {
		if _, err := st.Recv(); err != nil {
			if errors.Is(err, io.EOF) {
				return nil
			}
			return err
		}
	}
}
