package service

import (
	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// The enums of fadeloop.v1 and of package loop share their numbering
// (UNSPECIFIED = 0, then the values in the same order, with the same
// names); convert_test.go checks every value's name on both sides, so the
// conversions below are plain casts.

// ScenarioFromProto converts a fadeloop.v1 Scenario to the engine's
// loop.Scenario, field for field. It does not validate or normalise; a nil
// message gives the zero Scenario.
func ScenarioFromProto(m *pb.Scenario) loop.Scenario {
	if m == nil {
		return loop.Scenario{}
	}
	sc := loop.Scenario{
		Name:      m.GetName(),
		Receiver:  receiverFromProto(m.GetReceiver()),
		InnerLoop: innerLoopFromProto(m.GetInnerLoop()),
		OuterLoop: outerLoopFromProto(m.GetOuterLoop()),
		Link:      linkFromProto(m.GetLink()),
		Run:       runFromProto(m.GetRun()),
		Layout:    layoutFromProto(m.GetLayout()),
	}
	if gs := m.GetGroups(); len(gs) > 0 {
		sc.Groups = make([]loop.UserGroup, len(gs))
		for i, g := range gs {
			sc.Groups[i] = groupFromProto(g)
		}
	}
	return sc
}

func receiverFromProto(m *pb.Receiver) loop.Receiver {
	return loop.Receiver{
		ChipRateHz:           m.GetChipRateHz(),
		BitRateBps:           m.GetBitRateBps(),
		NoiseFigureDB:        m.GetNoiseFigureDb(),
		OtherCellRatio:       m.GetOtherCellRatio(),
		SIREstimationErrorDB: m.GetSirEstimationErrorDb(),
		SIRAveragingSlots:    int(m.GetSirAveragingSlots()),
		RakeFingers:          loop.RakeFingers(m.GetRakeFingers()),
		MaxFingers:           int(m.GetMaxFingers()),
	}
}

func groupFromProto(m *pb.UserGroup) loop.UserGroup {
	g := loop.UserGroup{
		Name:                    m.GetName(),
		Count:                   int(m.GetCount()),
		Placement:               loop.Placement(m.GetPlacement()),
		DistancesM:              cloneFloats(m.GetDistancesM()),
		MinDistanceM:            m.GetMinDistanceM(),
		MaxDistanceM:            m.GetMaxDistanceM(),
		CarrierFrequencyHz:      m.GetCarrierFrequencyHz(),
		Profile:                 m.GetProfile(),
		RicianKDB:               m.GetRicianKDb(),
		LOS:                     m.GetLos(),
		Generator:               loop.Generator(m.GetGenerator()),
		Sinusoids:               int(m.GetSinusoids()),
		ShadowingSigmaDB:        m.GetShadowingSigmaDb(),
		ShadowingDecorrelationM: m.GetShadowingDecorrelationM(),
		PathLoss:                pathLossFromProto(m.GetPathLoss()),
		ActivityFactor:          m.GetActivityFactor(),
		MeanBurstSlots:          m.GetMeanBurstSlots(),
	}
	if ss := m.GetSpeeds(); len(ss) > 0 {
		g.Speeds = make([]loop.SpeedShare, len(ss))
		for i, s := range ss {
			g.Speeds[i] = loop.SpeedShare{SpeedKmh: s.GetSpeedKmh(), Weight: s.GetWeight()}
		}
	}
	g.CustomTaps = tapsFromProto(m.GetCustomTaps())
	return g
}

func tapsFromProto(ts []*pb.Tap) []loop.Tap {
	if len(ts) == 0 {
		return nil
	}
	out := make([]loop.Tap, len(ts))
	for i, t := range ts {
		out[i] = loop.Tap{DelayNs: t.GetDelayNs(), PowerDB: t.GetPowerDb()}
	}
	return out
}

func pathLossFromProto(m *pb.PathLoss) loop.PathLoss {
	return loop.PathLoss{
		Model:         loop.PathLossModel(m.GetModel()),
		RefDistanceM:  m.GetRefDistanceM(),
		RefLossDB:     m.GetRefLossDb(),
		Exponent:      m.GetExponent(),
		BaseHeightM:   m.GetBaseHeightM(),
		MobileHeightM: m.GetMobileHeightM(),
	}
}

func innerLoopFromProto(m *pb.InnerLoop) loop.InnerLoop {
	return loop.InnerLoop{
		Mode:               loop.InnerMode(m.GetMode()),
		Command:            loop.Command(m.GetCommand()),
		UpdateRateHz:       m.GetUpdateRateHz(),
		StepDB:             m.GetStepDb(),
		LevelsDB:           cloneFloats(m.GetLevelsDb()),
		ThresholdsDB:       cloneFloats(m.GetThresholdsDb()),
		FeedbackDelaySlots: int(m.GetFeedbackDelaySlots()),
		CommandErrorProb:   m.GetCommandErrorProb(),
		MinPowerDBm:        m.GetMinPowerDbm(),
		MaxPowerDBm:        m.GetMaxPowerDbm(),
		InitialPower:       loop.InitialPower(m.GetInitialPower()),
		InitialPowerDBm:    m.GetInitialPowerDbm(),
		FixedPowerDBm:      m.GetFixedPowerDbm(),
	}
}

func outerLoopFromProto(m *pb.OuterLoop) loop.OuterLoop {
	return loop.OuterLoop{
		Enabled:          m.GetEnabled(),
		BLERTarget:       m.GetBlerTarget(),
		BlockSlots:       int(m.GetBlockSlots()),
		UpStepDB:         m.GetUpStepDb(),
		MinTargetDB:      m.GetMinTargetDb(),
		MaxTargetDB:      m.GetMaxTargetDb(),
		InitialTargetDB:  m.GetInitialTargetDb(),
		FreezeAtMaxPower: m.GetFreezeAtMaxPower(),
	}
}

func linkFromProto(m *pb.LinkCurve) loop.LinkCurve {
	lc := loop.LinkCurve{
		Kind:         loop.LinkKind(m.GetKind()),
		ThresholdDB:  m.GetThresholdDb(),
		SlopeDB:      m.GetSlopeDb(),
		EffectiveSIR: loop.EffectiveSIR(m.GetEffectiveSir()),
		EESMBeta:     m.GetEesmBeta(),
	}
	if t := m.GetTable(); len(t) > 0 {
		lc.Table = make([]loop.LinkPoint, len(t))
		for i, p := range t {
			lc.Table[i] = loop.LinkPoint{SIRDB: p.GetSirDb(), BLER: p.GetBler()}
		}
	}
	return lc
}

func runFromProto(m *pb.RunSettings) loop.RunSettings {
	return loop.RunSettings{
		Slots:          m.GetSlots(),
		DurationS:      m.GetDurationS(),
		WarmupSlots:    m.GetWarmupSlots(),
		Seed:           m.GetSeed(),
		Replications:   int(m.GetReplications()),
		OutageMarginDB: m.GetOutageMarginDb(),
		DistanceBins:   int(m.GetDistanceBins()),
		Batches:        int(m.GetBatches()),
	}
}

// ScenarioToProto converts an engine loop.Scenario to its fadeloop.v1
// message, field for field. Integer fields beyond the proto's int32 range
// are clamped (such values never pass validation anyway).
func ScenarioToProto(sc loop.Scenario) *pb.Scenario {
	m := &pb.Scenario{
		Name: sc.Name,
		Receiver: &pb.Receiver{
			ChipRateHz:           sc.Receiver.ChipRateHz,
			BitRateBps:           sc.Receiver.BitRateBps,
			NoiseFigureDb:        sc.Receiver.NoiseFigureDB,
			OtherCellRatio:       sc.Receiver.OtherCellRatio,
			SirEstimationErrorDb: sc.Receiver.SIREstimationErrorDB,
			SirAveragingSlots:    i32(sc.Receiver.SIRAveragingSlots),
			RakeFingers:          pb.RakeFingers(sc.Receiver.RakeFingers),
			MaxFingers:           i32(sc.Receiver.MaxFingers),
		},
		InnerLoop: innerLoopToProto(sc.InnerLoop),
		OuterLoop: outerLoopToProto(sc.OuterLoop),
		Link:      linkToProto(sc.Link),
		Run: &pb.RunSettings{
			Slots:          sc.Run.Slots,
			DurationS:      sc.Run.DurationS,
			WarmupSlots:    sc.Run.WarmupSlots,
			Seed:           sc.Run.Seed,
			Replications:   i32(sc.Run.Replications),
			OutageMarginDb: sc.Run.OutageMarginDB,
			DistanceBins:   i32(sc.Run.DistanceBins),
			Batches:        i32(sc.Run.Batches),
		},
		Layout: layoutToProto(sc.Layout),
	}
	for _, g := range sc.Groups {
		m.Groups = append(m.Groups, groupToProto(g))
	}
	return m
}

func groupToProto(g loop.UserGroup) *pb.UserGroup {
	m := &pb.UserGroup{
		Name:                    g.Name,
		Count:                   i32(g.Count),
		Placement:               pb.Placement(g.Placement),
		DistancesM:              cloneFloats(g.DistancesM),
		MinDistanceM:            g.MinDistanceM,
		MaxDistanceM:            g.MaxDistanceM,
		CarrierFrequencyHz:      g.CarrierFrequencyHz,
		Profile:                 g.Profile,
		RicianKDb:               g.RicianKDB,
		Los:                     g.LOS,
		Generator:               pb.Generator(g.Generator),
		Sinusoids:               i32(g.Sinusoids),
		ShadowingSigmaDb:        g.ShadowingSigmaDB,
		ShadowingDecorrelationM: g.ShadowingDecorrelationM,
		PathLoss: &pb.PathLoss{
			Model:         pb.PathLossModel(g.PathLoss.Model),
			RefDistanceM:  g.PathLoss.RefDistanceM,
			RefLossDb:     g.PathLoss.RefLossDB,
			Exponent:      g.PathLoss.Exponent,
			BaseHeightM:   g.PathLoss.BaseHeightM,
			MobileHeightM: g.PathLoss.MobileHeightM,
		},
		ActivityFactor: g.ActivityFactor,
		MeanBurstSlots: g.MeanBurstSlots,
	}
	for _, s := range g.Speeds {
		m.Speeds = append(m.Speeds, &pb.SpeedShare{SpeedKmh: s.SpeedKmh, Weight: s.Weight})
	}
	m.CustomTaps = tapsToProto(g.CustomTaps)
	return m
}

func tapsToProto(ts []loop.Tap) []*pb.Tap {
	var out []*pb.Tap
	for _, t := range ts {
		out = append(out, &pb.Tap{DelayNs: t.DelayNs, PowerDb: t.PowerDB})
	}
	return out
}

func innerLoopToProto(il loop.InnerLoop) *pb.InnerLoop {
	return &pb.InnerLoop{
		Mode:               pb.InnerMode(il.Mode),
		Command:            pb.Command(il.Command),
		UpdateRateHz:       il.UpdateRateHz,
		StepDb:             il.StepDB,
		LevelsDb:           cloneFloats(il.LevelsDB),
		ThresholdsDb:       cloneFloats(il.ThresholdsDB),
		FeedbackDelaySlots: i32(il.FeedbackDelaySlots),
		CommandErrorProb:   il.CommandErrorProb,
		MinPowerDbm:        il.MinPowerDBm,
		MaxPowerDbm:        il.MaxPowerDBm,
		InitialPower:       pb.InitialPower(il.InitialPower),
		InitialPowerDbm:    il.InitialPowerDBm,
		FixedPowerDbm:      il.FixedPowerDBm,
	}
}

func outerLoopToProto(ol loop.OuterLoop) *pb.OuterLoop {
	return &pb.OuterLoop{
		Enabled:          ol.Enabled,
		BlerTarget:       ol.BLERTarget,
		BlockSlots:       i32(ol.BlockSlots),
		UpStepDb:         ol.UpStepDB,
		MinTargetDb:      ol.MinTargetDB,
		MaxTargetDb:      ol.MaxTargetDB,
		InitialTargetDb:  ol.InitialTargetDB,
		FreezeAtMaxPower: ol.FreezeAtMaxPower,
	}
}

func linkToProto(lc loop.LinkCurve) *pb.LinkCurve {
	m := &pb.LinkCurve{
		Kind:         pb.LinkKind(lc.Kind),
		ThresholdDb:  lc.ThresholdDB,
		SlopeDb:      lc.SlopeDB,
		EffectiveSir: pb.EffectiveSir(lc.EffectiveSIR),
		EesmBeta:     lc.EESMBeta,
	}
	for _, p := range lc.Table {
		m.Table = append(m.Table, &pb.LinkPoint{SirDb: p.SIRDB, Bler: p.BLER})
	}
	return m
}

func cloneFloats(x []float64) []float64 {
	if len(x) == 0 {
		return nil
	}
	return append([]float64(nil), x...)
}

// i32 converts an int to int32, clamping to the int32 range.
func i32(x int) int32 {
	const maxI32, minI32 = 1<<31 - 1, -1 << 31
	switch {
	case x > maxI32:
		return maxI32
	case x < minI32:
		return minI32
	}
	return int32(x)
}
