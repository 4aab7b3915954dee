package loop

import (
	"context"
	"math"
	"strings"
	"testing"
)

// TestInfeasibleBeforeRun: a load the scenario's own pole equation cannot
// carry (4000 voice users in one 3.84 Mchip/s cell: load factor ≈ 500) is
// reported infeasible before any slot is simulated; the work done is zero
// user-slots (not a wall-clock bound), and the users are summarised, not
// listed.
func TestInfeasibleBeforeRun(t *testing.T) {
	sc := baseScenario(4000, 90000)
	sc.Run.Replications = 3
	var worked int64
	rep, err := Run(context.Background(), sc, RunOptions{Progress: func(p Progress) { worked = max(worked, p.UserSlots) }})
	if err != nil {
		t.Fatal(err)
	}
	f := rep.Feasibility
	// Pole equation (derived): (1+f)·n·γ/(G_p+γ) with γ = 5 dB, G_p = 3.84e6/12.2e3.
	gamma := dbToLin(5)
	want := (1 + sc.Receiver.OtherCellRatio) * 4000 * gamma / (sc.Receiver.ProcessingGain() + gamma)
	if !f.Infeasible || math.Abs(f.LoadFactor-want) > 1e-9*want {
		t.Fatalf("feasibility %+v, want infeasible with load factor %g", f, want)
	}
	if rep.SimulatedUserSlots != 0 || worked != 0 || len(rep.Users) != 0 {
		t.Errorf("simulated %d user-slots (progress %d), %d user figures; want none", rep.SimulatedUserSlots, worked, len(rep.Users))
	}
	if !strings.Contains(f.Reason, "4000 users, indices 0..3999, 100..500 m") || len(f.Reason) > 400 {
		t.Errorf("reason does not summarise the users: %q", f.Reason)
	}
	// Just below the pole the same cell runs.
	n := int(math.Floor(0.95 / (want / 4000)))
	sc = baseScenario(n, 300)
	sc.Run.WarmupSlots = 20
	rep, err = Run(context.Background(), sc, RunOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if rep.SimulatedUserSlots != int64(n)*300 {
		t.Errorf("%d users below the pole: simulated %d user-slots", n, rep.SimulatedUserSlots)
	}
	// With the outer loop on, the lowest target it may set decides.
	sc = baseScenario(40, 300)
	sc.OuterLoop.Enabled = true
	sc.OuterLoop.MinTargetDB = -5
	sc.OuterLoop.InitialTargetDB = 20 // beyond the pole for 40 users, but the loop may go down to −5 dB
	if rep, err = Run(context.Background(), sc, RunOptions{}); err != nil || rep.SimulatedUserSlots == 0 {
		t.Errorf("outer loop able to lower the target: not run (%v)", err)
	}
}

// TestPinnedUsersSummarised: users stuck at max power below target are
// counted with their index and distance ranges, and at most MaxListedUsers
// are listed.
func TestPinnedUsersSummarised(t *testing.T) {
	sc := baseScenario(40, 2000)
	sc.Groups[0].MaxDistanceM = 20000 // far users cannot reach 5 dB at 24 dBm
	sc.Run.Replications = 1
	rep := mustRun(t, sc, nil, RunOptions{})
	f := rep.Feasibility
	if !f.Infeasible || len(f.Users) == 0 || len(f.Users) > MaxListedUsers {
		t.Fatalf("feasibility %+v", f)
	}
	if !strings.Contains(f.Reason, "users, indices") || !strings.Contains(f.Reason, "..20000 m") {
		t.Errorf("reason %q does not summarise the pinned users", f.Reason)
	}
}
