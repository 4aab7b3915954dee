package service

import (
	"context"
	"testing"

	"google.golang.org/grpc/codes"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// TestServerInfo: the info RPC reports the configured limits and the
// built-in profiles as package fading defines them, and the limits it
// reports are the ones the server enforces.
func TestServerInfo(t *testing.T) {
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			cfg := Config{MaxCost: 7e9, MaxRecvMessageBytes: 8 << 20}
			env := startEnv(t, tr, cfg)
			info, err := pb.NewInfoServiceClient(env.conn).GetServerInfo(context.Background(), &pb.GetServerInfoRequest{})
			if err != nil {
				t.Fatal(err)
			}
			if info.GetEngineVersion() != loop.EngineVersion || info.GetApiVersion() != "fadeloop.v1" || info.GetMulticellEngineVersion() != multicell.EngineVersion {
				t.Errorf("versions %q, %q, multi-cell %q", info.GetEngineVersion(), info.GetApiVersion(), info.GetMulticellEngineVersion())
			}
			l := info.GetLimits()
			if l.GetMaxCostTapSlots() != 7e9 || l.GetMaxRecvMessageBytes() != 8<<20 ||
				l.GetMaxSendMessageBytes() != DefaultMaxMessageBytes {
				t.Errorf("limits do not follow the Config: %v", l)
			}
			// Tap counts of the 3GPP profiles, TS 36.101 Annex B.2
			// (memory): EPA 7, EVA 9, ETU 9 taps; FLAT one.
			want := map[string]int{"FLAT": 1, "EPA": 7, "EVA": 9, "ETU": 9}
			names := fading.BuiltinProfileNames()
			if len(info.GetProfiles()) != len(names) {
				t.Fatalf("%d profiles, fading has %d", len(info.GetProfiles()), len(names))
			}
			for i, p := range info.GetProfiles() {
				fp, err := fading.BuiltinProfile(names[i])
				if err != nil || p.GetName() != fp.Name || len(p.GetTaps()) != len(fp.Taps) {
					t.Errorf("profile %d: %s with %d taps, fading: %s with %d (%v)", i, p.GetName(), len(p.GetTaps()), fp.Name, len(fp.Taps), err)
					continue
				}
				for j, tap := range p.GetTaps() {
					if tap.GetDelayNs() != fp.Taps[j].DelayNs || tap.GetPowerDb() != fp.Taps[j].PowerDB {
						t.Errorf("%s tap %d: %v, fading %v", p.GetName(), j, tap, fp.Taps[j])
					}
				}
				if n, ok := want[p.GetName()]; ok && n != len(p.GetTaps()) {
					t.Errorf("%s: %d taps, TS 36.101 gives %d", p.GetName(), len(p.GetTaps()), n)
				}
			}
			// The reported limits are enforced: one user or one traced
			// user more is rejected.
			sc := &pb.Scenario{Groups: []*pb.UserGroup{{Count: l.GetMaxUsers() + 1, Profile: "FLAT"}}}
			wantCode(t, simulateErr(t, env, sc, nil), codes.InvalidArgument)
			users := make([]int32, l.GetMaxTracedUsers()+1)
			for i := range users {
				users[i] = int32(i)
			}
			sc = &pb.Scenario{Groups: []*pb.UserGroup{{Count: l.GetMaxTracedUsers() + 1, Profile: "FLAT"}}}
			wantCode(t, simulateErr(t, env, sc, &pb.TraceOptions{DecimationSlots: 10, Users: users}), codes.InvalidArgument)
		})
	}
}

// simulateErr runs Simulate and returns the stream's error.
func simulateErr(t *testing.T, env *testEnv, sc *pb.Scenario, tr *pb.TraceOptions) error {
	t.Helper()
	stream, err := env.sim.Simulate(context.Background(), &pb.SimulateRequest{Scenario: sc, Traces: tr})
	if err != nil {
		return err
	}
	for {
		if _, err := stream.Recv(); err != nil {
			return err
		}
	}
}
