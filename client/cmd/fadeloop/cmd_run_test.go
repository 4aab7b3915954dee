package main

import (
	"context"
	"testing"

	"github.com/fadeloop/fadeloop/client"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"github.com/fadeloop/fadeloop/service"
)

// TestTraceSamplesAsBefore: the trace decimation is now the engine's
// (loop.TraceDecimation, asked for through TraceOptions.samples_per_user);
// the traces of the README's run examples keep the sample count and slot
// spacing the CLI's own rule gave them before (one sample every
// ⌊slots / 1500⌋ slots, slots = round(duration_s · update_rate_hz) for
// these files, which give a duration and no run.slots).
func TestTraceSamplesAsBefore(t *testing.T) {
	for _, tc := range []struct {
		name    string
		args    []string // scenario file, as in the README's command
		wantDec int64    // decimation of the CLI's former rule
		wantN   int      // samples per traced user it gave
	}{
		// fadeloop run: 10 s × 1500 Hz = 15 000 slots → every 10th slot.
		{"default", nil, 10, 1500},
		// fadeloop run testdata/scenarios/near_far_stress.yaml --plot traces=…:
		// 6 s × 1500 Hz = 9000 slots → every 6th slot.
		{"near_far_stress", []string{"../../../testdata/scenarios/near_far_stress.yaml"}, 6, 1500},
	} {
		t.Run(tc.name, func(t *testing.T) {
			sf, err := loadScenario(tc.args)
			if err != nil {
				t.Fatal(err)
			}
			cl, err := client.Embedded(service.Config{}, client.Options{})
			if err != nil {
				t.Fatal(err)
			}
			defer cl.Close()
			ctx := context.Background()
			info, err := cl.ServerInfo(ctx)
			if err != nil {
				t.Fatal(err)
			}
			// --plot traces with the default --trace-points 1500 and no
			// --trace-users: the nearest, median and farthest users are
			// picked after the run, so every user (up to the limit) is traced.
			req := &pb.SimulateRequest{Scenario: sf.Scenario,
				Traces: traceRequest(sf.Scenario, info.GetLimits().GetMaxTracedUsers(), 1500, nil, true)}
			if req.Traces.GetDecimationSlots() != 0 || req.Traces.GetSamplesPerUser() != 1500 {
				t.Fatalf("trace request %v: want samples_per_user 1500 and no decimation of the CLI's own", req.Traces)
			}
			rep, err := cl.Simulate(ctx, req, nil)
			if err != nil {
				t.Fatal(err)
			}
			if len(rep.GetTraces()) == 0 {
				t.Fatal("no traces")
			}
			for _, tr := range rep.GetTraces() {
				s := tr.GetSlots()
				if len(s) != tc.wantN {
					t.Errorf("user %d: %d samples, want %d", tr.GetUser(), len(s), tc.wantN)
				}
				if len(s) > 1 && s[1]-s[0] != tc.wantDec {
					t.Errorf("user %d: samples %d slots apart, want %d", tr.GetUser(), s[1]-s[0], tc.wantDec)
				}
			}
		})
	}
}
