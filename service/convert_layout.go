package service

import (
	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// layoutFromProto converts the multi-cell section of a scenario (nil: the
// zero Layout, single-cell mode).
func layoutFromProto(m *pb.Layout) loop.Layout {
	if m == nil {
		return loop.Layout{}
	}
	p, h, o := m.GetPropagation(), m.GetHandover(), m.GetOpenLoop()
	return loop.Layout{
		Sites:              int(m.GetSites()),
		SectorsPerSite:     int(m.GetSectorsPerSite()),
		InterSiteDistanceM: m.GetInterSiteDistanceM(),
		WrapAround:         m.GetWrapAround(),
		Propagation: loop.LayoutPropagation{
			PathLossExponent: p.GetPathLossExponent(),
			LossAt1kmDB:      p.GetLossAt_1KmDb(),
			MinDistanceM:     p.GetMinDistanceM(),
			ShadowingDB:      p.GetShadowingDb(),
			SiteCorrelation:  p.GetSiteCorrelation(),
			DecorrelationM:   p.GetDecorrelationM(),
			ShadowingSlots:   int(p.GetShadowingSlots()),
			FastFading:       loop.FastFading(p.GetFastFading()),
		},
		Handover: loop.Handover{
			WindowDB:     h.GetWindowDb(),
			HysteresisDB: h.GetHysteresisDb(),
			MaxActive:    int(h.GetMaxActive()),
			UpdateSlots:  int(h.GetUpdateSlots()),
		},
		OpenLoop: loop.OpenLoopSetting{
			Enabled:            o.GetEnabled(),
			EstimationErrorDB:  o.GetEstimationErrorDb(),
			DelaySlots:         int(o.GetDelaySlots()),
			AssumedNoiseRiseDB: o.GetAssumedNoiseRiseDb(),
		},
	}
}

// layoutToProto converts the multi-cell section; the zero Layout (single
// cell) gives nil, so single-cell scenarios convert as before.
func layoutToProto(l loop.Layout) *pb.Layout {
	if l == (loop.Layout{}) {
		return nil
	}
	p, h, o := l.Propagation, l.Handover, l.OpenLoop
	return &pb.Layout{
		Sites:              i32(l.Sites),
		SectorsPerSite:     i32(l.SectorsPerSite),
		InterSiteDistanceM: l.InterSiteDistanceM,
		WrapAround:         l.WrapAround,
		Propagation: &pb.LayoutPropagation{
			PathLossExponent: p.PathLossExponent,
			LossAt_1KmDb:     p.LossAt1kmDB,
			MinDistanceM:     p.MinDistanceM,
			ShadowingDb:      p.ShadowingDB,
			SiteCorrelation:  p.SiteCorrelation,
			DecorrelationM:   p.DecorrelationM,
			ShadowingSlots:   i32(p.ShadowingSlots),
			FastFading:       pb.FastFading(p.FastFading),
		},
		Handover: &pb.Handover{
			WindowDb:     h.WindowDB,
			HysteresisDb: h.HysteresisDB,
			MaxActive:    i32(h.MaxActive),
			UpdateSlots:  i32(h.UpdateSlots),
		},
		OpenLoop: &pb.OpenLoopSetting{
			Enabled:            o.Enabled,
			EstimationErrorDb:  o.EstimationErrorDB,
			DelaySlots:         i32(o.DelaySlots),
			AssumedNoiseRiseDb: o.AssumedNoiseRiseDB,
		},
	}
}

func estimatesToProto(es []loop.Estimate) []*pb.Estimate {
	var out []*pb.Estimate
	for _, e := range es {
		out = append(out, estimateToProto(e))
	}
	return out
}

func estimatesFromProto(es []*pb.Estimate) []loop.Estimate {
	var out []loop.Estimate
	for _, e := range es {
		out = append(out, estimateFromProto(e))
	}
	return out
}

// layoutReportToProto converts the multi-cell report section (nil stays nil).
func layoutReportToProto(r *loop.LayoutReport) *pb.LayoutReport {
	if r == nil {
		return nil
	}
	o := r.Overall
	m := &pb.LayoutReport{Overall: &pb.LayoutOverall{
		OtherToOwn:          estimateToProto(o.OtherToOwn),
		NoiseRiseDb:         estimateToProto(o.NoiseRiseDB),
		OutageProbability:   estimateToProto(o.OutageProbability),
		OutageByLegs:        estimatesToProto(o.OutageByLegs),
		LegShare:            estimatesToProto(o.LegShare),
		SoftHandoverShare:   estimateToProto(o.SoftHandoverShare),
		TimeAtMaxPower:      estimateToProto(o.TimeAtMaxPower),
		TimeAtMaxByLegs:     estimatesToProto(o.TimeAtMaxByLegs),
		TimeAtMaxEdge:       estimateToProto(o.TimeAtMaxEdge),
		SirErrorMeanDb:      estimateToProto(o.SIRErrorMeanDB),
		SirErrorStdDb:       estimateToProto(o.SIRErrorStdDB),
		TxPowerMeanDbm:      estimateToProto(o.TxPowerMeanDBm),
		AchievedBler:        estimateToProto(o.AchievedBLER),
		OtherToOwnSpreadP5:  o.OtherToOwnSpreadP5,
		OtherToOwnSpreadP95: o.OtherToOwnSpreadP95,
	}}
	for _, c := range r.Cells {
		m.Cells = append(m.Cells, &pb.LayoutCell{
			Name:           c.Name,
			Site:           i32(c.Site),
			OtherToOwn:     estimateToProto(c.OtherToOwn),
			OtherToOwnP50:  c.OtherToOwnP50,
			OtherToOwnP95:  c.OtherToOwnP95,
			NoiseRiseDb:    estimateToProto(c.NoiseRiseDB),
			NoiseRiseP95Db: c.NoiseRiseP95DB,
			ServedUsers:    c.ServedUsers,
			SiteXM:         c.SiteXM,
			SiteYM:         c.SiteYM,
			BoresightDeg:   c.BoresightDeg,
		})
	}
	for _, u := range r.UserPoints {
		m.UserPoints = append(m.UserPoints, &pb.LayoutUserPoint{
			XM:                u.XM,
			YM:                u.YM,
			Group:             i32(u.Group),
			BestCell:          i32(u.BestCell),
			MeanLegs:          u.MeanLegs,
			OutageProbability: u.OutageProbability,
			TxPowerMeanDbm:    u.TxPowerMeanDBm,
		})
	}
	return m
}

// layoutReportFromProto converts the multi-cell report section back.
func layoutReportFromProto(m *pb.LayoutReport) *loop.LayoutReport {
	if m == nil {
		return nil
	}
	o := m.GetOverall()
	r := &loop.LayoutReport{Overall: loop.LayoutOverall{
		OtherToOwn:          estimateFromProto(o.GetOtherToOwn()),
		NoiseRiseDB:         estimateFromProto(o.GetNoiseRiseDb()),
		OutageProbability:   estimateFromProto(o.GetOutageProbability()),
		OutageByLegs:        estimatesFromProto(o.GetOutageByLegs()),
		LegShare:            estimatesFromProto(o.GetLegShare()),
		SoftHandoverShare:   estimateFromProto(o.GetSoftHandoverShare()),
		TimeAtMaxPower:      estimateFromProto(o.GetTimeAtMaxPower()),
		TimeAtMaxByLegs:     estimatesFromProto(o.GetTimeAtMaxByLegs()),
		TimeAtMaxEdge:       estimateFromProto(o.GetTimeAtMaxEdge()),
		SIRErrorMeanDB:      estimateFromProto(o.GetSirErrorMeanDb()),
		SIRErrorStdDB:       estimateFromProto(o.GetSirErrorStdDb()),
		TxPowerMeanDBm:      estimateFromProto(o.GetTxPowerMeanDbm()),
		AchievedBLER:        estimateFromProto(o.GetAchievedBler()),
		OtherToOwnSpreadP5:  o.GetOtherToOwnSpreadP5(),
		OtherToOwnSpreadP95: o.GetOtherToOwnSpreadP95(),
	}}
	for _, c := range m.GetCells() {
		r.Cells = append(r.Cells, loop.LayoutCell{
			Name:           c.GetName(),
			Site:           int(c.GetSite()),
			OtherToOwn:     estimateFromProto(c.GetOtherToOwn()),
			OtherToOwnP50:  c.GetOtherToOwnP50(),
			OtherToOwnP95:  c.GetOtherToOwnP95(),
			NoiseRiseDB:    estimateFromProto(c.GetNoiseRiseDb()),
			NoiseRiseP95DB: c.GetNoiseRiseP95Db(),
			ServedUsers:    c.GetServedUsers(),
			SiteXM:         c.GetSiteXM(),
			SiteYM:         c.GetSiteYM(),
			BoresightDeg:   c.GetBoresightDeg(),
		})
	}
	for _, u := range m.GetUserPoints() {
		r.UserPoints = append(r.UserPoints, loop.LayoutUserPoint{
			XM:                u.GetXM(),
			YM:                u.GetYM(),
			Group:             int(u.GetGroup()),
			BestCell:          int(u.GetBestCell()),
			MeanLegs:          u.GetMeanLegs(),
			OutageProbability: u.GetOutageProbability(),
			TxPowerMeanDBm:    u.GetTxPowerMeanDbm(),
		})
	}
	return r
}
