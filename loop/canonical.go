package loop

// CanonicalScenario returns the canonical benchmark scenario, the one of
// shared/bench/peer_numba.py: 64 users evenly spread in distance over
// 50..1000 m (d_i = 50 + 950·i/63 m), path loss 128.1 + 37.6·log10(d/1 km) dB
// (written as 52.9 dB at 10 m, exponent 3.76), no shadowing, three
// equal-power Rayleigh taps, 30 km/h at 2 GHz (f_D ≈ 55.6 Hz), 3.84 Mchip/s
// and 12.2 kbit/s (G_p = 314.75), noise figure 5 dB, other-cell ratio 0.2,
// a 1500 Hz one-bit inner loop with 1 dB steps and one slot of feedback
// delay (a command from slot t applies in slot t+2), power within
// [−50, 24] dBm starting at 0 dBm, a fixed 5 dB SIR target, 90 000 slots
// (60 s) of which the first 1 500 are warm-up, outage at target − 3 dB,
// seed 1, every tap its own RAKE finger (as in the peer). It is already
// normalised and valid.
//
// The peer's taps have a combined mean power of 1/2, not 1 (each tap is
// scaled by 0.5/L after |h|² of unit mean), so its channel is 3.01 dB below
// its stated path loss; the scenario folds that into ref_loss_db
// (52.9 + 3.0103 dB at 10 m) so that both simulate the same link budget.
func CanonicalScenario() Scenario {
	const peerTapPowerDB = 3.0103 // 10·log10(2)
	return Scenario{
		Name: "canonical-64",
		Receiver: Receiver{
			ChipRateHz:        3.84e6,
			BitRateBps:        12.2e3,
			NoiseFigureDB:     5,
			OtherCellRatio:    0.2,
			SIRAveragingSlots: 1,
			// The peer combines its three taps (100 ns apart) as separate
			// fingers: the ideal receiver, not the chip-resolved default.
			RakeFingers: RakeFingersIdealEveryTap,
			MaxFingers:  DefaultMaxFingers,
		},
		Groups: []UserGroup{{
			Name:               "all",
			Count:              64,
			Placement:          PlacementUniformDistance,
			MinDistanceM:       50,
			MaxDistanceM:       1000,
			Speeds:             []SpeedShare{{SpeedKmh: 30, Weight: 1}},
			CarrierFrequencyHz: 2e9,
			CustomTaps:         []Tap{{DelayNs: 0, PowerDB: 0}, {DelayNs: 100, PowerDB: 0}, {DelayNs: 200, PowerDB: 0}},
			Generator:          GeneratorSumOfSinusoids,
			Sinusoids:          16, // the peer's 16 sinusoids per branch
			PathLoss:           PathLoss{Model: PathLossLogDistance, RefDistanceM: 10, RefLossDB: 52.9 + peerTapPowerDB, Exponent: 3.76},
			ActivityFactor:     1,
		}},
		InnerLoop: InnerLoop{
			Mode:               InnerModeClosedLoop,
			Command:            CommandFixedStep,
			UpdateRateHz:       1500,
			StepDB:             1,
			FeedbackDelaySlots: 1,
			MinPowerDBm:        -50,
			MaxPowerDBm:        24,
			InitialPower:       InitialPowerFixed,
			InitialPowerDBm:    0,
		},
		OuterLoop: OuterLoop{
			Enabled:         false,
			BLERTarget:      DefaultBLERTarget,
			BlockSlots:      DefaultBlockSlots,
			UpStepDB:        DefaultUpStepDB,
			MinTargetDB:     DefaultMinTargetDB,
			MaxTargetDB:     DefaultMaxTargetDB,
			InitialTargetDB: 5,
		},
		Link: LinkCurve{
			Kind:         LinkLogistic,
			ThresholdDB:  3,
			SlopeDB:      DefaultSlopeDB,
			EffectiveSIR: EffectiveSIRLinearMean,
			EESMBeta:     DefaultEESMBeta,
		},
		Run: RunSettings{
			Slots:          90000,
			WarmupSlots:    1500,
			Seed:           1,
			Replications:   1,
			OutageMarginDB: 3,
			DistanceBins:   DefaultDistanceBins,
			Batches:        DefaultBatches,
		},
	}
}
