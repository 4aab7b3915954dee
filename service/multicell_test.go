package service

import (
	"context"
	"testing"

	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// harbourTown is testdata/scenarios/harbour_town.json shortened: 7 sites ×
// 3 sectors, 9 users per cell, 600 slots, 2 replications.
func harbourTown(t testing.TB) *pb.Scenario {
	sc := readScenario(t, "harbour_town.json")
	sc.Run.DurationS, sc.Run.Slots, sc.Run.WarmupSlots, sc.Run.Replications = 0, 600, 150, 2
	return sc
}

// TestSimulateMultiCell: a scenario with a layout runs on the multi-cell
// engine over both transports; the report equals multicell.RunScenario's
// and carries the layout section with every cell.
func TestSimulateMultiCell(t *testing.T) {
	sc := harbourTown(t)
	direct, err := multicell.RunScenario(context.Background(), ScenarioFromProto(sc), loop.RunOptions{})
	if err != nil {
		t.Fatal(err)
	}
	want := stripTiming(ReportToProto(direct))
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{})
			_, rep, err := simulate(context.Background(), env, &pb.SimulateRequest{Scenario: sc})
			if err != nil {
				t.Fatal(err)
			}
			if !proto.Equal(stripTiming(rep), want) {
				t.Fatal("Simulate report differs from multicell.RunScenario")
			}
			l := rep.GetLayout()
			if len(l.GetCells()) != 21 || len(l.GetUserPoints()) != 189 || rep.GetAggregate().GetUsers() != 189 {
				t.Errorf("layout: %d cells, %d user points, %d users; want 21, 189, 189", len(l.GetCells()), len(l.GetUserPoints()), rep.GetAggregate().GetUsers())
			}
			if rep.GetEngineVersion() != multicell.EngineVersion {
				t.Errorf("engine %q", rep.GetEngineVersion())
			}
			if o := l.GetOverall(); o.GetOutageProbability().GetValue() != rep.GetAggregate().GetOutageProbability().GetValue() {
				t.Error("aggregate outage is not the layout's")
			}
		})
	}
}

// TestSimulateMultiCellBadInput: layout rules name their field, from the
// proto rules and from the engine's.
func TestSimulateMultiCellBadInput(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	cases := []struct {
		name  string
		edit  func(*pb.Scenario)
		field string
	}{
		{"sites", func(s *pb.Scenario) { s.Layout.Sites = 5 }, "scenario.layout.sites"},
		{"window", func(s *pb.Scenario) { s.Layout.Handover.WindowDb = 30 }, "scenario.layout.handover.window_db"},
		{"exponent", func(s *pb.Scenario) { s.Layout.Propagation.PathLossExponent = 9 }, "scenario.layout.propagation.path_loss_exponent"},
		{"count per cell", func(s *pb.Scenario) { s.Groups[0].Count = 1500 }, "scenario.groups[0].count"},
		{"other-cell ratio", func(s *pb.Scenario) { s.Receiver.OtherCellRatio = 0.5 }, "scenario.receiver.other_cell_ratio"},
		{"traces", nil, "traces.users"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			sc := harbourTown(t)
			req := &pb.SimulateRequest{Scenario: sc}
			if c.edit != nil {
				c.edit(sc)
			} else {
				req.Traces = &pb.TraceOptions{DecimationSlots: 1, Users: []int32{0}}
			}
			_, _, err := simulate(context.Background(), env, req)
			wantInvalid(t, err, c.field)
		})
	}
}

// TestSweepMultiCell: a sweep over the handover window runs every point on
// the multi-cell engine.
func TestSweepMultiCell(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	sc := harbourTown(t)
	sc.Run.Replications = 1
	points, _, err := sweep(t, env, &pb.SweepRequest{Base: sc, SeedMode: pb.SeedMode_SEED_MODE_COMMON,
		Axes: []*pb.SweepAxis{{Path: "layout.handover.window_db", Values: []float64{0, 6}}}})
	if err != nil {
		t.Fatal(err)
	}
	if len(points) != 2 {
		t.Fatalf("%d points", len(points))
	}
	share := map[float64]float64{}
	for i, p := range points {
		r := p.GetReport()
		if r.GetAggregate().GetUsers() != 189 || r.GetLayout() == nil {
			t.Errorf("point %d: %d users, layout %v; want 189 (21 cells × 9) and a layout section", i, r.GetAggregate().GetUsers(), r.GetLayout() != nil)
		}
		share[p.GetCoordinates()[0]] = r.GetLayout().GetOverall().GetSoftHandoverShare().GetValue()
		if len(r.GetLayout().GetUserPoints()) != 0 {
			t.Errorf("point %d: summary point carries user points", i)
		}
	}
	// A 0 dB window with 1 dB hysteresis keeps a second cell only while the
	// old best stays within 0.5 dB of the new one; a 6 dB window holds
	// many more users in soft handover.
	if !(share[6] > share[0]+0.1) {
		t.Errorf("soft-handover share %g at 6 dB, %g at 0 dB: want a clear rise", share[6], share[0])
	}
}
