package loop

import (
	"context"
	"encoding/json"
	"math"
	"runtime"
	"testing"
	"time"

	"math/rand/v2"
)

// TestController checks the control law of one user: feedback delay
// (a command from slot t changes the power of slot t+1+D), power limits
// without accumulation, multi-level decisions and the jump rule.
func TestController(t *testing.T) {
	il := InnerLoop{Mode: InnerModeClosedLoop, Command: CommandFixedStep, UpdateRateHz: 1500, StepDB: 1, FeedbackDelaySlots: 2,
		MinPowerDBm: -50, MaxPowerDBm: 3, InitialPower: InitialPowerFixed, InitialPowerDBm: 0}
	ol := OuterLoop{BLERTarget: 0.1, BlockSlots: 10, UpStepDB: 1, MinTargetDB: -10, MaxTargetDB: 20, InitialTargetDB: 0}
	rcv := Receiver{ChipRateHz: 3.84e6, BitRateBps: 12.2e3, SIRAveragingSlots: 1}
	c, err := NewController(il, ol, rcv, 100, 1, 0)
	if err != nil {
		t.Fatal(err)
	}
	// Slot 0 low (up), then high (down): the up shows in slot 3 = 0+1+D.
	meas := []float64{-10, 10, 10, 10, 10}
	want := []float64{0, 0, 1, 0, -1} // power of slots 1..5
	for i, m := range meas {
		d := c.Step(m, nil)
		if math.Abs(d.PowerDBm-want[i]) > 1e-9 {
			t.Errorf("after slot %d power %g dBm, want %g", i, d.PowerDBm, want[i])
		}
		if wantCmd := map[bool]float64{true: 1, false: -1}[m < 0]; d.CommandDB != wantCmd {
			t.Errorf("slot %d command %g, want %g", i, d.CommandDB, wantCmd)
		}
	}
	// At maximum power further ups are not accumulated: one down leaves max − 1 dB.
	il.FeedbackDelaySlots = 0
	c, _ = NewController(il, ol, rcv, 100, 1, 0)
	for range 10 {
		c.Step(-20, nil)
	}
	if d := c.Step(20, nil); math.Abs(d.PowerDBm-2) > 1e-9 {
		t.Errorf("after ups past max and one down: %g dBm, want max − 1 = 2", d.PowerDBm)
	}
	// Multi-level: SIR error −5 → +3, −1 → +1, 0 → 0, +1 → −1 (thresholds −3, −0.5, 0.5).
	il.Command = CommandMultiLevel
	il.LevelsDB, il.ThresholdsDB = DefaultLevelsDB, DefaultThresholdsDB
	c, _ = NewController(il, ol, rcv, 100, 1, 0)
	for _, x := range [][2]float64{{-5, 3}, {-1, 1}, {0, 0}, {1, -1}, {-3, 1}, {-3.01, 3}} {
		if d := c.Step(x[0], nil); d.CommandDB != x[1] {
			t.Errorf("multi-level SIR error %g dB: command %g, want %g", x[0], d.CommandDB, x[1])
		}
	}
	// Jump rule: up Δ on an error, down Δτ/(1−τ) otherwise.
	ol.Enabled = true
	c, _ = NewController(il, ol, rcv, 100, 1, 0)
	yes, no := true, false
	if d := c.Step(0, &yes); d.TargetDB != 1 {
		t.Errorf("target after an error %g, want 1", d.TargetDB)
	}
	if d := c.Step(0, &no); math.Abs(d.TargetDB-(1-1.0/9)) > 1e-12 {
		t.Errorf("target after a good block %g, want 1 − 1/9", d.TargetDB)
	}
	// Adaptive (Jayant): repeated ups grow the step by 1.5 up to 2.25·Δ.
	il.Command = CommandAdaptive
	il.MaxPowerDBm = 40
	c, _ = NewController(il, OuterLoop{BLERTarget: 0.1, BlockSlots: 1, UpStepDB: 1, MinTargetDB: -10, MaxTargetDB: 20}, rcv, 100, 1, 0)
	p := 0.0
	for i, step := range []float64{1, 1.5, 2.25, 2.25} {
		d := c.Step(-30, nil)
		if math.Abs(d.PowerDBm-p-step) > 1e-9 {
			t.Errorf("adaptive up %d: step %g dB, want %g", i, d.PowerDBm-p, step)
		}
		p = d.PowerDBm
	}
	if d := c.Step(30, nil); math.Abs(p-d.PowerDBm-1.5) > 1e-9 {
		t.Errorf("adaptive reversal: step %g dB, want 1.5", p-d.PowerDBm)
	}
	if _, err := NewController(InnerLoop{}, OuterLoop{}, Receiver{}, -1, 0, 0); err == nil {
		t.Errorf("empty settings accepted")
	}
}

// TestControllerAllocs: Step allocates nothing.
func TestControllerAllocs(t *testing.T) {
	il := InnerLoop{Mode: InnerModeClosedLoop, Command: CommandFixedStep, UpdateRateHz: 1500, StepDB: 1, FeedbackDelaySlots: 1,
		CommandErrorProb: 0.1, MinPowerDBm: -50, MaxPowerDBm: 24, InitialPower: InitialPowerOpenLoop}
	ol := OuterLoop{Enabled: true, BLERTarget: 0.1, BlockSlots: 10, UpStepDB: 1, MinTargetDB: -10, MaxTargetDB: 20, InitialTargetDB: 0}
	c, err := NewController(il, ol, Receiver{ChipRateHz: 3.84e6, BitRateBps: 12.2e3, SIREstimationErrorDB: 1, SIRAveragingSlots: 4}, 120, 1, 0)
	if err != nil {
		t.Fatal(err)
	}
	e := false
	if a := testing.AllocsPerRun(1000, func() { c.Step(3, &e) }); a != 0 {
		t.Errorf("Step allocates %g times", a)
	}
}

// TestBoundedMemory: the engine's allocations do not grow with the slot
// count (no per-slot or per-block allocation; traces aside).
func TestBoundedMemory(t *testing.T) {
	measure := func(slots int64) (uint64, uint64) {
		sc := baseScenario(16, slots)
		sc.Groups[0].ShadowingSigmaDB = 4
		var a, b runtime.MemStats
		runtime.GC()
		runtime.ReadMemStats(&a)
		mustRun(t, sc, nil, RunOptions{})
		runtime.ReadMemStats(&b)
		return b.Mallocs - a.Mallocs, b.TotalAlloc - a.TotalAlloc
	}
	m1, b1 := measure(20000)
	m2, b2 := measure(80000)
	t.Logf("20k slots: %d allocs %d B; 80k slots: %d allocs %d B", m1, b1, m2, b2)
	// 60 000 more slots are 117 more generation blocks and 4× the batch
	// length: allow a few dozen allocations of slack, none per block.
	if m2 > m1+60 || b2 > b1+b1/10 {
		t.Errorf("allocations grow with slots: %d → %d allocs, %d → %d bytes", m1, m2, b1, b2)
	}
}

func TestCancel(t *testing.T) {
	sc := baseScenario(64, 5_000_000)
	ctx, cancel := context.WithTimeout(context.Background(), 50*time.Millisecond)
	defer cancel()
	var last Progress
	_, err := Run(ctx, sc, RunOptions{Progress: func(p Progress) { last = p }, ProgressEvery: time.Millisecond})
	if err != context.DeadlineExceeded {
		t.Fatalf("err %v, want deadline exceeded", err)
	}
	// Promptness by work, not wall time: the run stopped far short of its
	// 64 × 5 000 000 user-slots.
	if total := int64(64) * sc.TotalSlots() * int64(max(sc.Run.Replications, 1)); last.UserSlots >= total/2 {
		t.Errorf("cancelled run had done %d of %d user-slots", last.UserSlots, total)
	}
}

func TestProgressAndTraceValidation(t *testing.T) {
	sc := baseScenario(4, 3000)
	var last Progress
	calls := 0
	mustRun(t, sc, nil, RunOptions{Progress: func(p Progress) { last = p; calls++ }, ProgressEvery: time.Millisecond})
	if calls == 0 || last.Fraction != 1 || last.UserSlots != 4*3000 {
		t.Errorf("progress %d calls, last %+v", calls, last)
	}
	_, err := Run(context.Background(), sc, RunOptions{Trace: TraceOptions{Users: []int{9}, Decimation: -1}})
	v, ok := err.(Violations)
	if !ok || !hasField(v, "trace.users[0]") || !hasField(v, "trace.decimation") {
		t.Errorf("bad trace options: %v", err)
	}
	bad := sc
	bad.InnerLoop.StepDB = -1
	if _, err := Run(context.Background(), bad, RunOptions{}); err == nil {
		t.Errorf("invalid scenario accepted")
	}
}

func newTestRand(seed uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, 0x5eed)) }

// TestEdgeScenarios runs valid but extreme scenarios: each must run to a
// finite, marshalable report without panicking.
func TestEdgeScenarios(t *testing.T) {
	cases := map[string]func(*Scenario){
		"one slot measured": func(s *Scenario) { s.Run.Slots, s.Run.WarmupSlots, s.Run.Batches = 21, 1, 20 },
		"delay beyond run":  func(s *Scenario) { s.InnerLoop.FeedbackDelaySlots = 1000 },
		"duration":          func(s *Scenario) { s.Run.Slots, s.Run.DurationS = 0, 1.5 },
		"pinned at max": func(s *Scenario) {
			s.InnerLoop.MaxPowerDBm, s.InnerLoop.MinPowerDBm, s.InnerLoop.InitialPowerDBm = -40, -50, -45
		},
		"sixteen levels": func(s *Scenario) {
			s.InnerLoop.Command = CommandMultiLevel
			s.InnerLoop.LevelsDB, s.InnerLoop.ThresholdsDB = nil, nil
			for i := 0; i < 16; i++ {
				s.InnerLoop.LevelsDB = append(s.InnerLoop.LevelsDB, float64(i)-8)
				if i > 0 {
					s.InnerLoop.ThresholdsDB = append(s.InnerLoop.ThresholdsDB, float64(i)-8.5)
				}
			}
			s.InnerLoop.CommandErrorProb = 0.5
		},
		"adaptive with errors": func(s *Scenario) { s.InnerLoop.Command, s.InnerLoop.CommandErrorProb = CommandAdaptive, 0.2 },
		"ideal with activity": func(s *Scenario) {
			s.InnerLoop.Mode = InnerModeIdeal
			s.Groups[0].ActivityFactor, s.Groups[0].MeanBurstSlots = 0.5, 1
		},
		"fixed power": func(s *Scenario) { s.InnerLoop.Mode = InnerModeFixedPower },
		"table link EESM": func(s *Scenario) {
			s.Link = LinkCurve{Kind: LinkTable, Table: []LinkPoint{{-5, 1}, {0, 0.5}, {5, 0}}, EffectiveSIR: EffectiveSIREESM, EESMBeta: 0.5}
			s.OuterLoop.Enabled = true
			s.OuterLoop.BlockSlots = 1
		},
		"Hata LOS spectral": func(s *Scenario) {
			s.Groups[0].CarrierFrequencyHz = 900e6
			s.Groups[0].MinDistanceM, s.Groups[0].MaxDistanceM = 1000, 5000
			s.Groups[0].PathLoss = PathLoss{Model: PathLossHataSuburban, BaseHeightM: 30, MobileHeightM: 1.5}
			s.Groups[0].LOS, s.Groups[0].RicianKDB = true, 10
			s.Groups[0].Generator = GeneratorSpectral
			s.Groups[0].ShadowingSigmaDB = 8
		},
		"static users and overload": func(s *Scenario) {
			s.Groups[0].Speeds[0].SpeedKmh = 0
			s.Receiver.OtherCellRatio = 10
			s.OuterLoop.InitialTargetDB = 30
		},
		"heavy averaging and error": func(s *Scenario) {
			s.Receiver.SIRAveragingSlots, s.Receiver.SIREstimationErrorDB = 1000, 20
		},
		"area placement open loop": func(s *Scenario) {
			s.Groups[0].Placement = PlacementUniformArea
			s.InnerLoop.InitialPower = InitialPowerOpenLoop
			s.Groups[0].Count = 1
		},
	}
	for name, mut := range cases {
		sc := baseScenario(5, 3000)
		mut(&sc)
		sc.Normalise()
		if v := sc.Validate(); len(v) > 0 {
			t.Errorf("%s: not valid: %v", name, v)
			continue
		}
		rep, err := Run(context.Background(), sc, RunOptions{Trace: TraceOptions{Users: []int{0}}})
		if err != nil {
			t.Errorf("%s: %v", name, err)
			continue
		}
		if _, err := json.Marshal(rep); err != nil {
			t.Errorf("%s: report does not marshal: %v", name, err)
		}
		if name == "pinned at max" && !rep.Feasibility.Infeasible {
			t.Errorf("%s: not reported infeasible: %+v", name, rep.Feasibility)
		}
		if name == "static users and overload" && (!rep.Feasibility.Infeasible || rep.Feasibility.LoadFactor < 1) {
			t.Errorf("%s: pole overload not reported: %+v", name, rep.Feasibility)
		}
	}
}
