package service

import (
	"time"

	"github.com/fadeloop/fadeloop/loop/tune"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// This file converts Tune and Capacity requests from the API to package
// loop/tune and their answers back, field for field, without validating.

// AxisFromProto converts a grid axis: listed values, listed names, or the range first,
// last, count (log: geometric spacing).
func AxisFromProto(m *pb.SweepAxis) tune.Axis {
	return tune.Axis{
		Path:   m.GetPath(),
		Values: cloneFloats(m.GetValues()),
		Names:  append([]string(nil), m.GetNames()...),
		First:  m.GetFirst(),
		Last:   m.GetLast(),
		Count:  int(m.GetCount()),
		Log:    m.GetLog(),
	}
}

// TuneRequestFromProto converts a fadeloop.v1 TuneRequest to the tuner's
// request, field for field (the base scenario as ScenarioFromProto gives
// it). It does not validate.
func TuneRequestFromProto(m *pb.TuneRequest) tune.Request {
	r := tune.Request{
		Base:         ScenarioFromProto(m.GetBase()),
		Objective:    objectiveFromProto(m.GetObjective()),
		Confidence:   m.GetConfidence(),
		SkipBaseline: m.GetSkipBaseline(),
		Budget: tune.Budget{
			MinReplications:   int(m.GetBudget().GetMinReplications()),
			MaxReplications:   int(m.GetBudget().GetMaxReplications()),
			BatchReplications: int(m.GetBudget().GetBatchReplications()),
			MaxUserSlots:      m.GetBudget().GetMaxUserSlots(),
		},
	}
	for _, a := range m.GetAxes() {
		r.Axes = append(r.Axes, AxisFromProto(a))
	}
	for _, c := range m.GetConditions() {
		cd := tune.Condition{Name: c.GetName(), Weight: c.GetWeight()}
		for _, o := range c.GetOverrides() {
			ov := tune.Override{Path: o.GetPath()}
			switch v := o.GetValue().(type) {
			case *pb.Override_Number:
				ov.Value = v.Number
			case *pb.Override_Text:
				ov.Text = v.Text
			}
			cd.Overrides = append(cd.Overrides, ov)
		}
		r.Conditions = append(r.Conditions, cd)
	}
	return r
}

func objectiveFromProto(m *pb.Objective) tune.Objective {
	return tune.Objective{
		// ObjectiveKind numbers are the same on both sides (tune_test.go
		// checks every name).
		Kind:             tune.ObjectiveKind(m.GetKind()),
		OutageLimit:      m.GetOutageLimit(),
		BLERTolerance:    m.GetBlerTolerance(),
		IndifferenceZone: m.GetIndifferenceZone(),
		NoiseRiseLimitDB: m.GetNoiseRiseLimitDb(),
		OutageWarning:    m.GetOutageWarning(),
	}
}

func objectiveToProto(o tune.Objective) *pb.Objective {
	return &pb.Objective{
		Kind:             pb.ObjectiveKind(o.Kind),
		OutageLimit:      o.OutageLimit,
		BlerTolerance:    o.BLERTolerance,
		IndifferenceZone: o.IndifferenceZone,
		NoiseRiseLimitDb: o.NoiseRiseLimitDB,
		OutageWarning:    o.OutageWarning,
	}
}

func figureLabelToProto(l tune.FigureLabel) *pb.FigureLabel {
	return &pb.FigureLabel{Key: l.Key, Name: l.Name, Unit: l.Unit, DiffUnit: l.DiffUnit, DisplayScale: l.Scale, Decimals: i32(l.Decimals)}
}

// CapacityRequestFromProto converts a fadeloop.v1 CapacityRequest to the
// tuner's request. It does not validate.
func CapacityRequestFromProto(m *pb.CapacityRequest) tune.CapacityRequest {
	return tune.CapacityRequest{
		Base:         ScenarioFromProto(m.GetBase()),
		Group:        int(m.GetGroup()),
		OutageLimit:  m.GetOutageLimit(),
		MinCount:     int(m.GetMinCount()),
		MaxCount:     int(m.GetMaxCount()),
		Replications: int(m.GetReplications()),
		Confidence:   m.GetConfidence(),
		MaxUserSlots: m.GetMaxUserSlots(),

		NoiseRiseLimitDB: m.GetNoiseRiseLimitDb(),
	}
}

func replicationEstimateToProto(e tune.ReplicationEstimate) *pb.ReplicationEstimate {
	return &pb.ReplicationEstimate{Mean: e.Mean, Low: e.Low, High: e.High, N: i32(e.N)}
}

func tuneFiguresToProto(f tune.TuneFigures) *pb.TuneFigures {
	m := &pb.TuneFigures{
		SirErrorMeanDb:         replicationEstimateToProto(f.SIRErrorMeanDB),
		SirErrorStdDb:          replicationEstimateToProto(f.SIRErrorStdDB),
		OutageProbability:      replicationEstimateToProto(f.OutageProbability),
		AchievedBler:           replicationEstimateToProto(f.BLER),
		BlerTarget:             f.BLERTarget,
		TxPowerMeanDbm:         replicationEstimateToProto(f.TxPowerMeanDBm),
		MaxPowerFraction:       replicationEstimateToProto(f.TimeAtMaxPower),
		NoiseRiseMeanDb:        replicationEstimateToProto(f.NoiseRiseDB),
		InfeasibleReplications: i32(f.InfeasibleReplications),
	}
	if f.OtherToOwn != nil {
		m.OtherToOwn = replicationEstimateToProto(*f.OtherToOwn)
	}
	return m
}

func gridPointToProto(p tune.Point) *pb.GridPoint {
	m := &pb.GridPoint{Index: i32(p.Index)}
	for _, c := range p.Coords {
		m.Coords = append(m.Coords, &pb.Coord{Path: c.Path, Value: c.Value, Text: c.Text})
	}
	return m
}

func candidatesToProto(cs []tune.CandidateResult, withFigures bool) []*pb.CandidateResult {
	out := make([]*pb.CandidateResult, len(cs))
	for i, c := range cs {
		m := &pb.CandidateResult{
			Candidate:  i32(c.Candidate),
			Objective:  replicationEstimateToProto(c.Objective),
			DiffToBest: replicationEstimateToProto(c.DiffToBest),
			// CandidateStatus numbers are the same on both sides.
			Status:   pb.CandidateStatus(c.Status),
			Feasible: c.Feasible,
		}
		if withFigures {
			m.Figures = tuneFiguresToProto(c.Figures)
		}
		out[i] = m
	}
	return out
}

func decisionToProto(d tune.Decision) *pb.Decision {
	m := &pb.Decision{
		Best:             i32(d.Best),
		Setting:          gridPointToProto(d.Setting),
		Declared:         d.Declared,
		Leader:           i32(d.Leader),
		RunnerUp:         i32(d.RunnerUp),
		Evidence:         replicationEstimateToProto(d.Evidence),
		ConstraintsUnmet: d.ConstraintsUnmet,
		Reason:           d.Reason,
		// Verdict and WarningKind numbers are the same on both sides.
		Verdict:      pb.Verdict(d.Verdict),
		RankedBy:     figureLabelToProto(d.RankedBy),
		TieBreak:     d.TieBreak,
		Headline:     d.Headline,
		RunnerUpLine: d.RunnerUpLine,
	}
	for _, k := range d.TieSet {
		m.TieSet = append(m.TieSet, i32(k))
	}
	for _, k := range d.Ordering {
		m.Ordering = append(m.Ordering, i32(k))
	}
	for _, x := range d.Misses {
		m.Misses = append(m.Misses, &pb.ConstraintMiss{Condition: x.Condition, Figure: x.Figure, Value: x.Value,
			Limit: x.Limit, Upper: x.Upper, Excess: x.Excess, Text: x.Text})
	}
	for _, w := range d.Warnings {
		m.Warnings = append(m.Warnings, &pb.DecisionWarning{Kind: pb.WarningKind(w.Kind), Text: w.Text})
	}
	return m
}

// RecommendationToProto converts the tuner's answer; wall is the call's
// wall-clock time (effort.wall_time_s).
func RecommendationToProto(r *tune.Recommendation, wall time.Duration) *pb.Recommendation {
	if r == nil {
		return nil
	}
	m := &pb.Recommendation{
		Objective:         objectiveToProto(r.Objective),
		Confidence:        r.Confidence,
		Overall:           decisionToProto(r.Overall),
		OverallCandidates: candidatesToProto(r.OverallCandidates, false),
		Seed:              r.Seed,
		TieRule:           r.TieRule,
		Notice:            r.Notice,
		Effort: &pb.TuneEffort{
			Replications:                int64(r.Effort.Replications),
			BaselineReplications:        int64(r.Effort.BaselineReplications),
			UserSlots:                   r.Effort.UserSlots,
			Stages:                      i32(r.Effort.Stages),
			MaxReplicationsUsed:         i32(r.Effort.MaxReplicationsUsed),
			EqualAllocationReplications: int64(r.Effort.EqualAllocationReplications),
			BudgetExhausted:             r.Effort.BudgetExhausted,
			WallTimeS:                   wall.Seconds(),
		},
	}
	for _, p := range r.Candidates {
		m.Candidates = append(m.Candidates, gridPointToProto(p))
	}
	for _, l := range r.Figures {
		m.Figures = append(m.Figures, figureLabelToProto(l))
	}
	for _, c := range r.Conditions {
		cr := &pb.ConditionResult{
			Name:              c.Name,
			Weight:            c.Weight,
			Decision:          decisionToProto(c.Decision),
			Candidates:        candidatesToProto(c.Candidates, true),
			DopplerProductMax: c.DopplerProductMax,
			DopplerProductMin: c.DopplerProductMin,
			SpeedsKmh:         cloneFloats(c.SpeedsKmh),
		}
		if b := c.Baseline; b != nil {
			cr.Baseline = &pb.Baseline{Figures: tuneFiguresToProto(b.Figures), Gain: replicationEstimateToProto(b.Gain), BarelyHelps: b.BarelyHelps,
				Figure: figureLabelToProto(b.Figure), Fixed: replicationEstimateToProto(b.Fixed),
				Recommended: replicationEstimateToProto(b.Recommended), Text: b.Text, FixedMisses: b.FixedMisses}
		}
		m.Conditions = append(m.Conditions, cr)
	}
	return m
}

// CapacityResultToProto converts the capacity search's answer; wall is the
// call's wall-clock time.
func CapacityResultToProto(r *tune.CapacityResult, wall time.Duration) *pb.CapacityResult {
	if r == nil {
		return nil
	}
	m := &pb.CapacityResult{
		Count:      i32(r.Count),
		TotalUsers: i32(r.TotalUsers),
		BelowRange: r.BelowRange,
		AtRangeTop: r.AtRangeTop,
		Pole:       r.Pole,
		PoleParams: &pb.PoleParams{
			ChipRateHz:     r.PoleParams.ChipRateHz,
			BitRateBps:     r.PoleParams.BitRateBps,
			EbI0Db:         r.PoleParams.EbI0DB,
			ActivityFactor: r.PoleParams.ActivityFactor,
			OtherCellRatio: r.PoleParams.OtherCellRatio,
			Sectors:        r.PoleParams.Sectors,
		},
		PoleError:       r.PoleError,
		ModelPole:       r.ModelPole,
		NonMonotone:     r.NonMonotone,
		BudgetExhausted: r.BudgetExhausted,
		FailingCount:    i32(r.FailingCount),
		Replications:    int64(r.Replications),
		UserSlots:       r.UserSlots,
		Reason:          r.Reason,
		WallTimeS:       wall.Seconds(),

		OutageLimit:      r.OutageLimit,
		NoiseRiseLimitDb: r.NoiseRiseLimitDB,
		LimitedBy:        append([]string(nil), r.LimitedBy...),
		Headline:         r.Headline,
		Notice:           r.Notice,
	}
	for _, p := range r.Evaluated {
		m.Evaluated = append(m.Evaluated, &pb.CapacityPoint{
			Count: i32(p.Count), TotalUsers: i32(p.TotalUsers), Pass: p.Pass, Figures: tuneFiguresToProto(p.Figures),
			OutageOk: p.OutageOK, NoiseRiseOk: p.NoiseRiseOK, LoadFeasible: p.LoadFeasible})
	}
	return m
}
