package client

import (
	"testing"

	"google.golang.org/protobuf/proto"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"github.com/fadeloop/fadeloop/service"
)

// tinyTune searches two step sizes on the tiny scenario (cut to 600 slots)
// for the smallest SIR error spread, at most 4 replications each.
func tinyTune(t *testing.T) *pb.TuneRequest {
	sc := tinyScenario(t)
	sc.Run.Slots, sc.Run.WarmupSlots = 600, 100
	return &pb.TuneRequest{
		Base:               sc,
		Axes:               []*pb.SweepAxis{{Path: "inner_loop.step_db", Values: []float64{0.5, 2}}},
		Objective:          &pb.Objective{Kind: pb.ObjectiveKind_OBJECTIVE_KIND_MIN_SIR_ERROR_STD},
		Budget:             &pb.TuneBudget{MaxReplications: 4},
		ProgressIntervalMs: 1,
	}
}

func TestTuneEmbeddedAndRemoteAgree(t *testing.T) {
	req := tinyTune(t)
	var progress int
	a, err := embedded(t).Tune(ctxT(t), req, func(*pb.SearchProgress) { progress++ })
	if err != nil {
		t.Fatal(err)
	}
	rc, _ := remote(t, service.Config{}, Options{})
	b, err := rc.Tune(ctxT(t), req, nil)
	if err != nil {
		t.Fatal(err)
	}
	a.Effort.WallTimeS, b.Effort.WallTimeS = 0, 0
	if !proto.Equal(a, b) {
		t.Fatalf("embedded and remote recommendations differ:\n%v\n%v", a.GetOverall(), b.GetOverall())
	}
	if progress == 0 || len(a.GetCandidates()) != 2 || a.GetOverall().GetSetting() == nil {
		t.Errorf("%d progress events, %d candidates, setting %v", progress, len(a.GetCandidates()), a.GetOverall().GetSetting())
	}
}

func TestTuneInvalidInputKeepsViolations(t *testing.T) {
	req := tinyTune(t)
	req.Objective.Kind = pb.ObjectiveKind_OBJECTIVE_KIND_UNSPECIFIED
	req.Axes[0].Path = "inner_loop.no_such_field"
	_, err := embedded(t).Tune(ctxT(t), req, nil)
	inv, ok := AsInvalidInput(err)
	if !ok {
		t.Fatalf("error %v (%T) is not an InvalidInputError", err, err)
	}
	fields := map[string]bool{}
	for _, v := range inv.Violations {
		fields[v.Field] = true
	}
	if !fields["objective.kind"] {
		t.Errorf("no violation for objective.kind in %v", inv.Violations)
	}
}

func TestCapacityEmbeddedAndRemoteAgree(t *testing.T) {
	sc := tinyScenario(t)
	sc.Run.Slots, sc.Run.WarmupSlots = 600, 100
	req := &pb.CapacityRequest{Base: sc, OutageLimit: 0.05, MaxCount: 16, Replications: 2}
	a, err := embedded(t).Capacity(ctxT(t), req, nil)
	if err != nil {
		t.Fatal(err)
	}
	rc, _ := remote(t, service.Config{}, Options{})
	b, err := rc.Capacity(ctxT(t), req, nil)
	if err != nil {
		t.Fatal(err)
	}
	a.WallTimeS, b.WallTimeS = 0, 0
	if !proto.Equal(a, b) {
		t.Fatalf("embedded and remote capacity results differ:\n%v\n%v", a, b)
	}
	if len(a.GetEvaluated()) == 0 || a.GetPole() <= 0 {
		t.Errorf("result: %d evaluated counts, pole %g", len(a.GetEvaluated()), a.GetPole())
	}
}
