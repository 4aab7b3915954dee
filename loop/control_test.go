package loop

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/fadeloop/fadeloop/fading"
)

// TestControllerStepMatchesLinearForm: Controller.Step decides one-bit
// commands from the SIR error in dB when it is clear of 0, and in linear
// units (estimate m = 10^(x/10)·e^(σ·z), up when m/γ < 1) otherwise. Its
// answers must equal, bit for bit, those of the linear form alone, run
// here on a bank with the same random streams: measurements exactly at the
// target (starting at −2 dB, where 10^(−0.2)·(1/10^(−0.2)) rounds below 1
// and the linear form says up), within 1e−13 … 1e−6 dB of it and far from it, with and without
// estimation error and command errors, fixed and adaptive steps, delays 0
// and 2, and block results moving the target.
func TestControllerStepMatchesLinearForm(t *testing.T) {
	type setup struct {
		cmd     Command
		delay   int
		sigmaDB float64
		errP    float64
	}
	var setups []setup
	for _, cmd := range []Command{CommandFixedStep, CommandAdaptive} {
		for _, delay := range []int{0, 2} {
			for _, sigma := range []float64{0, 1} {
				for _, errP := range []float64{0, 0.05} {
					setups = append(setups, setup{cmd, delay, sigma, errP})
				}
			}
		}
	}
	offsets := []float64{0, 1e-13, -1e-13, 1e-10, -1e-10, 1e-6, -1e-6, 0.5, -0.5, 3, -3, 40, -40}
	for _, s := range setups {
		il := InnerLoop{Mode: InnerModeClosedLoop, Command: s.cmd, UpdateRateHz: 1500, StepDB: 1, FeedbackDelaySlots: s.delay,
			CommandErrorProb: s.errP, MinPowerDBm: -50, MaxPowerDBm: 24, InitialPower: InitialPowerFixed, InitialPowerDBm: 0.3}
		ol := OuterLoop{Enabled: true, BLERTarget: 0.1, BlockSlots: 15, UpStepDB: 0.7, MinTargetDB: -10, MaxTargetDB: 20, InitialTargetDB: -2}
		rcv := Receiver{ChipRateHz: 3.84e6, BitRateBps: 12.2e3, SIREstimationErrorDB: s.sigmaDB, SIRAveragingSlots: 1}
		const seed, user = 9, 3
		c, err := NewController(il, ol, rcv, 100, seed, user)
		if err != nil {
			t.Fatal(err)
		}
		// The reference: the bank's linear form with the same streams.
		ref := newBank(1, il, ol, 1, []float64{dbToLin(il.InitialPowerDBm)})
		measRand := fading.NewStream(seed, user, 0, streamMeasErr)
		cmdRand := fading.NewStream(seed, user, 0, streamCmdErr)
		sigmaLn := s.sigmaDB * math.Ln10 / 10
		r := rand.New(rand.NewPCG(1, 2))
		var fastShare int
		const slots = 3000
		for slot := range slots {
			var blockErr *bool
			if slot%15 == 14 {
				e := r.IntN(10) == 0
				blockErr = &e
			}
			x := c.TargetDB() + offsets[r.IntN(len(offsets))]
			if blockErr != nil {
				ref.blockEnd(0, *blockErr)
				// The target moves first: measure against the new one.
				x = ref.targetDB[0] + offsets[r.IntN(len(offsets))]
			}
			got := c.Step(x, blockErr)

			m := dbToLin(x)
			if sigmaLn > 0 {
				m *= math.Exp(sigmaLn * measRand.NormFloat64())
			}
			var off []uint8
			if s.errP > 0 {
				k := uint8(0)
				if cmdRand.Float64() < s.errP {
					k = uint8(1 + cmdRand.IntN(len(ref.levelDB)-1))
				}
				off = []uint8{k}
			}
			if math.Abs((x-ref.targetDB[0])*math.Ln10/10) > decisionGuard {
				fastShare++
			}
			ref.decide([]float64{m}, off, nil)
			ref.apply()
			want := ControlDecision{CommandDB: ref.commandDB(0), PowerDBm: linToDB(ref.p[0]), TargetDB: ref.targetDB[0]}
			if got != want {
				t.Fatalf("%+v slot %d (SIR %v dB, target %v dB): Step %+v, linear form %+v", s, slot, x, want.TargetDB, got, want)
			}
		}
		// Both forms must have been exercised.
		if fastShare == 0 || fastShare == slots {
			t.Errorf("%+v: %d of %d slots clear of the guard, want both kinds", s, fastShare, slots)
		}
	}
}
