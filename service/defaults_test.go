package service

import (
	"context"
	"encoding/json"
	"os"
	"strings"
	"testing"

	"go.yaml.in/yaml/v3"
	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/encoding/protojson"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// minimalScenario reads testdata/scenarios/minimal.yaml as a fadeloop.v1
// Scenario (YAML mapped to protojson).
func minimalScenario(t *testing.T) *pb.Scenario {
	t.Helper()
	b, err := os.ReadFile("../testdata/scenarios/minimal.yaml")
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := yaml.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	j, err := json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	sc := &pb.Scenario{}
	if err := protojson.Unmarshal(j, sc); err != nil {
		t.Fatal(err)
	}
	return sc
}

// TestSimulateDefaults runs the minimal scenario file (chip and bit rates,
// one group with count, distance and speed) through Simulate over bufconn
// and a loopback listener: no field of it is rejected for being unset, and
// the report's normalised scenario shows the defaults, RAKE fingers
// included.
func TestSimulateDefaults(t *testing.T) {
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{})
			sc := minimalScenario(t)
			if testing.Short() {
				sc.Run = &pb.RunSettings{DurationS: 1} // 1500 slots; the defaults are under test, not the figures
			}
			_, rep, err := simulate(context.Background(), env, &pb.SimulateRequest{Scenario: sc})
			if err != nil {
				t.Fatalf("minimal scenario: %v", err)
			}
			n := rep.GetNormalisedScenario()
			g := n.GetGroups()[0]
			for _, c := range []struct {
				field     string
				got, want any
			}{
				{"receiver.rake_fingers", n.GetReceiver().GetRakeFingers(), pb.RakeFingers_RAKE_FINGERS_CHIP_RESOLVED},
				{"receiver.max_fingers", n.GetReceiver().GetMaxFingers(), int32(4)},
				{"groups[0].placement", g.GetPlacement(), pb.Placement_PLACEMENT_UNIFORM_AREA},
				{"groups[0].min_distance_m", g.GetMinDistanceM(), 35.0},
				{"groups[0].generator", g.GetGenerator(), pb.Generator_GENERATOR_DEFAULT},
				{"groups[0].profile", g.GetProfile(), "FLAT"},
				{"groups[0].path_loss.model", g.GetPathLoss().GetModel(), pb.PathLossModel_PATH_LOSS_MODEL_LOG_DISTANCE},
				{"inner_loop.mode", n.GetInnerLoop().GetMode(), pb.InnerMode_INNER_MODE_CLOSED_LOOP},
				{"inner_loop.command", n.GetInnerLoop().GetCommand(), pb.Command_COMMAND_FIXED_STEP},
				{"inner_loop.initial_power", n.GetInnerLoop().GetInitialPower(), pb.InitialPower_INITIAL_POWER_OPEN_LOOP},
				{"link.kind", n.GetLink().GetKind(), pb.LinkKind_LINK_KIND_LOGISTIC},
				{"link.effective_sir", n.GetLink().GetEffectiveSir(), pb.EffectiveSir_EFFECTIVE_SIR_LINEAR_MEAN},
				{"run.batches", n.GetRun().GetBatches(), int32(20)},
			} {
				if c.got != c.want {
					t.Errorf("%s = %v in the normalised scenario, want %v", c.field, c.got, c.want)
				}
			}
			if gf := rep.GetGroupFingers(); len(gf) != 1 || gf[0].GetFingers() != 1 || gf[0].GetResolvablePaths() != 1 {
				t.Errorf("group fingers %v, want one group with one finger", gf)
			}
			if rep.GetAggregate().GetUsers() != 8 {
				t.Errorf("report covers %d users, want 8", rep.GetAggregate().GetUsers())
			}
		})
	}
}

// TestEnumErrorsNameValues: a value outside an enum, caught by the .proto
// rules, is reported with the allowed names.
func TestEnumErrorsNameValues(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	sc := minimalScenario(t)
	sc.Groups[0].Generator = 7
	sc.Receiver.RakeFingers = 5
	_, _, err := simulate(context.Background(), env, &pb.SimulateRequest{Scenario: sc})
	st := wantCode(t, err, codes.InvalidArgument)
	got := badRequestFields(st)
	for field, want := range map[string]string{
		"scenario.groups[0].generator":   "must be one of GENERATOR_DEFAULT, GENERATOR_SUM_OF_SINUSOIDS or GENERATOR_SPECTRAL (or unset for the default), got 7",
		"scenario.receiver.rake_fingers": "must be one of RAKE_FINGERS_CHIP_RESOLVED or RAKE_FINGERS_IDEAL_EVERY_TAP (or unset for the default), got 5",
	} {
		if !strings.Contains(got[field], want) {
			t.Errorf("%s: %q, want it to contain %q", field, got[field], want)
		}
	}
}
