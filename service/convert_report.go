package service

import (
	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// ReportToProto converts the engine's run report to its fadeloop.v1 form,
// field for field.
func ReportToProto(r *loop.Report) *pb.RunReport {
	if r == nil {
		return nil
	}
	m := &pb.RunReport{
		Aggregate:          figuresToProto(r.Aggregate),
		Feasibility:        feasibilityToProto(r.Feasibility),
		NormalisedScenario: ScenarioToProto(r.NormalisedScenario),
		Seed:               r.Seed,
		EngineVersion:      r.EngineVersion,
		Replications:       i32(r.Replications),
		Slots:              r.Slots,
		SimulatedUserSlots: r.SimulatedUserSlots,
		WallTimeS:          r.WallTimeS,
		UserSlotsPerS:      r.UserSlotsPerS,
		Notes:              append([]string(nil), r.Notes...),
		Layout:             layoutReportToProto(r.Layout),
	}
	if len(r.Users) > 0 {
		m.Users = make([]*pb.UserFigures, len(r.Users))
		for i, u := range r.Users {
			m.Users[i] = &pb.UserFigures{
				User:       i32(u.User),
				Group:      i32(u.Group),
				DistanceM:  u.DistanceM,
				SpeedKmh:   u.SpeedKmh,
				DopplerHz:  u.DopplerHz,
				PathLossDb: u.PathLossDB,
				Figures:    figuresToProto(u.Figures),
			}
		}
	}
	if len(r.DistanceBins) > 0 {
		m.DistanceBins = make([]*pb.DistanceBinFigures, len(r.DistanceBins))
		for i, b := range r.DistanceBins {
			m.DistanceBins[i] = &pb.DistanceBinFigures{
				Bin:          i32(b.Bin),
				MinDistanceM: b.MinDistanceM,
				MaxDistanceM: b.MaxDistanceM,
				Figures:      figuresToProto(b.Figures),
			}
		}
	}
	for _, g := range r.GroupFingers {
		m.GroupFingers = append(m.GroupFingers, &pb.GroupFingers{
			Group:           i32(g.Group),
			Taps:            i32(g.Taps),
			ResolvablePaths: i32(g.ResolvablePaths),
			Fingers:         i32(g.Fingers),
			CapturedPowerDb: g.CapturedPowerDB,
			FirstFingerKDb:  g.FirstFingerKDB,
		})
	}
	if len(r.Traces) > 0 {
		m.Traces = make([]*pb.UserTrace, len(r.Traces))
		for i, t := range r.Traces {
			m.Traces[i] = &pb.UserTrace{
				User:          i32(t.User),
				Slots:         append([]int64(nil), t.Slots...),
				SirDb:         append([]float32(nil), t.SIRDB...),
				TargetDb:      append([]float32(nil), t.TargetDB...),
				TxPowerDbm:    append([]float32(nil), t.TxPowerDBm...),
				ChannelGainDb: append([]float32(nil), t.ChannelGainDB...),
			}
		}
	}
	return m
}

func estimateToProto(e loop.Estimate) *pb.Estimate {
	return &pb.Estimate{Value: e.Value, CiLow: e.CILow, CiHigh: e.CIHigh}
}

func percentilesToProto(p loop.Percentiles) *pb.Percentiles {
	return &pb.Percentiles{
		P1:  estimateToProto(p.P1),
		P5:  estimateToProto(p.P5),
		P50: estimateToProto(p.P50),
		P95: estimateToProto(p.P95),
		P99: estimateToProto(p.P99),
	}
}

func figuresToProto(f loop.Figures) *pb.Figures {
	return &pb.Figures{
		SirErrorMeanDb:        estimateToProto(f.SIRErrorMeanDB),
		SirErrorStdDb:         estimateToProto(f.SIRErrorStdDB),
		SirErrorPercentilesDb: percentilesToProto(f.SIRErrorPercentilesDB),
		OutageProbability:     estimateToProto(f.OutageProbability),
		AchievedBler:          estimateToProto(f.AchievedBLER),
		BlerTargetError:       estimateToProto(f.BLERTargetError),
		TxPowerMeanDbm:        estimateToProto(f.TxPowerMeanDBm),
		TxPowerPercentilesDbm: percentilesToProto(f.TxPowerPercentilesDBm),
		MaxPowerFraction:      estimateToProto(f.MaxPowerFraction),
		NoiseRiseMeanDb:       estimateToProto(f.NoiseRiseMeanDB),
		NoiseRiseP95Db:        estimateToProto(f.NoiseRiseP95DB),
		ConvergenceTimeS:      estimateToProto(f.ConvergenceTimeS),
		Users:                 i32(f.Users),
		UserSlots:             f.UserSlots,
	}
}

func feasibilityToProto(f loop.Feasibility) *pb.Feasibility {
	m := &pb.Feasibility{
		Infeasible:     f.Infeasible,
		Reason:         f.Reason,
		SpectralRadius: f.SpectralRadius,
		LoadFactor:     f.LoadFactor,
	}
	for _, u := range f.Users {
		m.Users = append(m.Users, i32(u))
	}
	return m
}

// ReportFromProto converts a fadeloop.v1 RunReport back to the engine's
// Report (for clients that work with the domain types, e.g. to print CSV).
// Absent parts become zero values.
func ReportFromProto(m *pb.RunReport) *loop.Report {
	if m == nil {
		return nil
	}
	r := &loop.Report{
		Aggregate:          figuresFromProto(m.GetAggregate()),
		NormalisedScenario: ScenarioFromProto(m.GetNormalisedScenario()),
		Seed:               m.GetSeed(),
		EngineVersion:      m.GetEngineVersion(),
		Replications:       int(m.GetReplications()),
		Slots:              m.GetSlots(),
		SimulatedUserSlots: m.GetSimulatedUserSlots(),
		WallTimeS:          m.GetWallTimeS(),
		UserSlotsPerS:      m.GetUserSlotsPerS(),
		Notes:              append([]string(nil), m.GetNotes()...),
		Layout:             layoutReportFromProto(m.GetLayout()),
	}
	f := m.GetFeasibility()
	r.Feasibility = loop.Feasibility{
		Infeasible:     f.GetInfeasible(),
		Reason:         f.GetReason(),
		SpectralRadius: f.GetSpectralRadius(),
		LoadFactor:     f.GetLoadFactor(),
	}
	for _, u := range f.GetUsers() {
		r.Feasibility.Users = append(r.Feasibility.Users, int(u))
	}
	for _, u := range m.GetUsers() {
		r.Users = append(r.Users, loop.UserFigures{
			User:       int(u.GetUser()),
			Group:      int(u.GetGroup()),
			DistanceM:  u.GetDistanceM(),
			SpeedKmh:   u.GetSpeedKmh(),
			DopplerHz:  u.GetDopplerHz(),
			PathLossDB: u.GetPathLossDb(),
			Figures:    figuresFromProto(u.GetFigures()),
		})
	}
	for _, b := range m.GetDistanceBins() {
		r.DistanceBins = append(r.DistanceBins, loop.DistanceBinFigures{
			Bin:          int(b.GetBin()),
			MinDistanceM: b.GetMinDistanceM(),
			MaxDistanceM: b.GetMaxDistanceM(),
			Figures:      figuresFromProto(b.GetFigures()),
		})
	}
	for _, g := range m.GetGroupFingers() {
		r.GroupFingers = append(r.GroupFingers, loop.GroupFingers{
			Group:           int(g.GetGroup()),
			Taps:            int(g.GetTaps()),
			ResolvablePaths: int(g.GetResolvablePaths()),
			Fingers:         int(g.GetFingers()),
			CapturedPowerDB: g.GetCapturedPowerDb(),
			FirstFingerKDB:  g.GetFirstFingerKDb(),
		})
	}
	for _, t := range m.GetTraces() {
		r.Traces = append(r.Traces, loop.UserTrace{
			User:          int(t.GetUser()),
			Slots:         append([]int64(nil), t.GetSlots()...),
			SIRDB:         append([]float32(nil), t.GetSirDb()...),
			TargetDB:      append([]float32(nil), t.GetTargetDb()...),
			TxPowerDBm:    append([]float32(nil), t.GetTxPowerDbm()...),
			ChannelGainDB: append([]float32(nil), t.GetChannelGainDb()...),
		})
	}
	return r
}

func estimateFromProto(e *pb.Estimate) loop.Estimate {
	return loop.Estimate{Value: e.GetValue(), CILow: e.GetCiLow(), CIHigh: e.GetCiHigh()}
}

func percentilesFromProto(p *pb.Percentiles) loop.Percentiles {
	return loop.Percentiles{
		P1:  estimateFromProto(p.GetP1()),
		P5:  estimateFromProto(p.GetP5()),
		P50: estimateFromProto(p.GetP50()),
		P95: estimateFromProto(p.GetP95()),
		P99: estimateFromProto(p.GetP99()),
	}
}

func figuresFromProto(f *pb.Figures) loop.Figures {
	return loop.Figures{
		SIRErrorMeanDB:        estimateFromProto(f.GetSirErrorMeanDb()),
		SIRErrorStdDB:         estimateFromProto(f.GetSirErrorStdDb()),
		SIRErrorPercentilesDB: percentilesFromProto(f.GetSirErrorPercentilesDb()),
		OutageProbability:     estimateFromProto(f.GetOutageProbability()),
		AchievedBLER:          estimateFromProto(f.GetAchievedBler()),
		BLERTargetError:       estimateFromProto(f.GetBlerTargetError()),
		TxPowerMeanDBm:        estimateFromProto(f.GetTxPowerMeanDbm()),
		TxPowerPercentilesDBm: percentilesFromProto(f.GetTxPowerPercentilesDbm()),
		MaxPowerFraction:      estimateFromProto(f.GetMaxPowerFraction()),
		NoiseRiseMeanDB:       estimateFromProto(f.GetNoiseRiseMeanDb()),
		NoiseRiseP95DB:        estimateFromProto(f.GetNoiseRiseP95Db()),
		ConvergenceTimeS:      estimateFromProto(f.GetConvergenceTimeS()),
		Users:                 int(f.GetUsers()),
		UserSlots:             f.GetUserSlots(),
	}
}
