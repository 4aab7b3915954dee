package service

import (
	"context"
	"errors"
	"fmt"
	"google.golang.org/protobuf/proto"
	"strings"
	"sync"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/tune"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// This file serves SimulationService.Tune and SimulationService.Capacity
// on top of package loop/tune, with the validation, cost bound, admission,
// cancellation and error mapping of Simulate and Sweep.

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

func tuneFiguresToProto(f tune.Figures) *pb.TuneFigures {
	return &pb.TuneFigures{
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

// tuneRequestFields are the top-level fields of the tuner's request whose
// violation paths are request paths; every other path is a scenario field.
var tuneRequestFields = map[string]bool{
	"axes": true, "conditions": true, "objective": true, "confidence": true, "budget": true,
	"group": true, "outage_limit": true, "min_count": true, "max_count": true,
	"replications": true, "max_user_slots": true, "noise_rise_limit_db": true,
}

// searchViolations maps the loop.Violations of a Tune or Capacity request
// to request field paths: the tuner's own fields keep their path; a
// scenario field that an axis or a condition override sets is reported
// at that axis or override; any other scenario field under "base.".
func searchViolations(err error, axes []*pb.SweepAxis, conds []*pb.Condition) ([]Violation, bool) {
	var lvs loop.Violations
	if !errors.As(err, &lvs) {
		return nil, false
	}
	out := make([]Violation, 0, len(lvs))
	for _, v := range lvs {
		f := v.Field
		head := f
		if i := strings.IndexAny(head, ".["); i >= 0 {
			head = head[:i]
		}
		switch {
		case tuneRequestFields[head]:
		default:
			f = apiPath("base.", f)
			for a, ax := range axes {
				if ax.GetPath() == v.Field {
					f = fmt.Sprintf("axes[%d]", a)
				}
			}
			for c, cd := range conds {
				for j, o := range cd.GetOverrides() {
					if o.GetPath() == v.Field {
						f = fmt.Sprintf("conditions[%d].overrides[%d]", c, j)
					}
				}
			}
		}
		out = append(out, Violation{Field: f, Description: v.Rule})
	}
	return out, true
}

// checkBase validates the converted base scenario of a search request
// (a normalised copy), reporting at "base.…".
func checkBase(base loop.Scenario) []Violation {
	b := base.Clone()
	b.Normalise()
	vs, _ := violationsOf(b.Validate().Err(), "base.")
	return vs
}

// checkTune validates a Tune request before any work: the .proto rules, the
// base scenario (converted once), then tune.TuneCost: the tuner's own rules
// for the axes, conditions, objective and budget, and the bound on its work,
// without building a candidate. It also bounds the size of the answer
// (tuneResponseBytes) by the server's message limit. It returns the
// tuner's request and its cost in tap-slots.
func (s *Server) checkTune(req *pb.TuneRequest) (tune.Request, int64, []Violation) {
	vs := s.validator.check(req, "")
	if req.GetBase() == nil {
		if len(vs) == 0 {
			vs = append(vs, Violation{Field: "base", Description: "value is required"})
		}
		return tune.Request{}, 0, vs
	}
	treq := TuneRequestFromProto(req)
	if vs = mergeViolations(vs, checkBase(treq.Base)); len(vs) > 0 {
		return treq, 0, vs
	}
	if vs := checkAxisForms(req.GetAxes()); len(vs) > 0 {
		return treq, 0, vs
	}
	cost, err := tune.TuneCost(treq)
	if err != nil {
		if tvs, ok := searchViolations(err, req.GetAxes(), req.GetConditions()); ok {
			return treq, 0, tvs
		}
		return treq, 0, []Violation{{Field: "axes", Description: err.Error()}}
	}
	if n, limit := tuneResponseBytes(treq, cost.Points), int64(s.cfg.MaxSendMessageBytes); n > limit {
		return treq, 0, []Violation{{Field: "axes", Description: fmt.Sprintf(
			"the recommendation for %d candidates × %d conditions would take about %d bytes, more than the server's maximum message size %d; use fewer candidates or conditions",
			cost.Points, max(len(treq.Conditions), 1), n, limit)}}
	}
	return treq, cost.TapSlots, nil
}

// tuneResponseBytes bounds the encoded size of the Recommendation of a
// Tune over k candidates: every candidate's grid point, its overall row
// and, per condition, its row with every figure, each sized by encoding a
// worst-case row (every number set, the longest axis names), plus the
// per-condition parts and a margin for the texts.
func tuneResponseBytes(req tune.Request, k int64) int64 {
	est := &pb.ReplicationEstimate{Mean: 1.5, Low: 1.5, High: 1.5, N: 1 << 30}
	fig := &pb.TuneFigures{SirErrorMeanDb: est, SirErrorStdDb: est, OutageProbability: est, AchievedBler: est,
		BlerTarget: 0.1, TxPowerMeanDbm: est, MaxPowerFraction: est, NoiseRiseMeanDb: est, InfeasibleReplications: 1 << 30}
	row := &pb.CandidateResult{Candidate: 1 << 30, Objective: est, DiffToBest: est, Status: pb.CandidateStatus(1), Feasible: true}
	overall := int64(proto.Size(row)) + 4
	row.Figures = fig
	perCond := int64(proto.Size(row)) + 4
	gp := &pb.GridPoint{Index: 1 << 30}
	for _, a := range req.Axes {
		longest := 0
		for _, n := range a.Names {
			longest = max(longest, len(n))
		}
		gp.Coords = append(gp.Coords, &pb.Coord{Path: a.Path, Value: 1.5, Text: strings.Repeat("x", longest)})
	}
	point := int64(proto.Size(gp)) + 4
	conds := int64(max(len(req.Conditions), 1))
	perCondFixed := int64(proto.Size(&pb.ConditionResult{Baseline: &pb.Baseline{Figures: fig, Gain: est}})) + 2048
	return satAdd(satMul(k, point+overall+conds*perCond), conds*perCondFixed+8192)
}

// checkCapacity validates a Capacity request before any work: the .proto
// rules, the base scenario, then the capacity search's own rules
// (tune.CheckCapacity, which runs nothing).
func (s *Server) checkCapacity(req *pb.CapacityRequest) (tune.CapacityRequest, []Violation) {
	vs := s.validator.check(req, "")
	if req.GetBase() == nil {
		if len(vs) == 0 {
			vs = append(vs, Violation{Field: "base", Description: "value is required"})
		}
		return tune.CapacityRequest{}, vs
	}
	creq := CapacityRequestFromProto(req)
	if vs = mergeViolations(vs, checkBase(creq.Base)); len(vs) > 0 {
		return creq, vs
	}
	if tvs, ok := searchViolations(tune.CheckCapacity(creq), nil, nil); ok {
		return creq, tvs
	}
	return creq, nil
}

// budgetExhausted maps a *tune.BudgetError to RESOURCE_EXHAUSTED naming the
// request's budget field.
func budgetExhausted(be *tune.BudgetError) error {
	st := status.New(codes.ResourceExhausted, be.Error())
	if d, err := st.WithDetails(&errdetails.QuotaFailure{Violations: []*errdetails.QuotaFailure_Violation{{
		Subject:     be.Field,
		Description: fmt.Sprintf("needs at least %d user-slots, the budget allows %d", be.NeedUserSlots, be.LimitUserSlots),
	}}}); err == nil {
		st = d
	}
	return st.Err()
}

// searchProgress forwards the tuner's progress to a stream through a
// one-slot mailbox (a slow reader never stalls the search: older events are
// replaced by newer ones), at most one event per interval.
type searchProgress struct {
	start    time.Time
	interval time.Duration
	mailbox  chan *pb.SearchProgress
	done     chan error
	mu       sync.Mutex
	last     time.Time
}

func newSearchProgress(intervalMs int32, send func(*pb.SearchProgress) error) *searchProgress {
	p := &searchProgress{start: time.Now(), interval: DefaultProgressInterval,
		mailbox: make(chan *pb.SearchProgress, 1), done: make(chan error, 1)}
	if intervalMs > 0 {
		p.interval = time.Duration(intervalMs) * time.Millisecond
	}
	go func() {
		var err error
		for m := range p.mailbox {
			if err == nil {
				err = send(m)
			}
		}
		p.done <- err
	}()
	return p
}

// post is the tune.Options.Progress callback.
func (p *searchProgress) post(tp tune.Progress) {
	now := time.Now()
	p.mu.Lock()
	if !p.last.IsZero() && now.Sub(p.last) < p.interval {
		p.mu.Unlock()
		return
	}
	p.last = now
	p.mu.Unlock()
	m := &pb.SearchProgress{
		Stage:               i32(tp.Stage),
		CandidatesRemaining: i32(tp.CandidatesRemaining),
		ReplicationsDone:    int64(tp.ReplicationsDone),
		UserSlotsDone:       tp.UserSlotsDone,
		ElapsedS:            now.Sub(p.start).Seconds(),
	}
	for {
		select {
		case p.mailbox <- m:
			return
		default:
		}
		select {
		case <-p.mailbox:
		default:
		}
	}
}

// close stops the sender and returns its first send error.
func (p *searchProgress) close() error {
	close(p.mailbox)
	return <-p.done
}

// countSearch records a finished search's work in the metrics and the call
// log.
func (s *Server) countSearch(ctx context.Context, userSlots int64, wall time.Duration) {
	infoFrom(ctx).userSlots.Add(userSlots)
	s.metrics.userSlots.Add(float64(userSlots))
	if w := wall.Seconds(); w > 0 {
		s.metrics.runRate.Set(float64(userSlots) / w)
	}
}

// searchError maps the error of a finished search: field violations to
// INVALID_ARGUMENT, a budget too small to answer to RESOURCE_EXHAUSTED,
// cancellation and deadlines to their codes.
func (s *Server) searchError(ctx context.Context, err error, axes []*pb.SweepAxis, conds []*pb.Condition) error {
	if vs, ok := searchViolations(err, axes, conds); ok {
		return s.reject(vs)
	}
	var be *tune.BudgetError
	if errors.As(err, &be) {
		return budgetExhausted(be)
	}
	return statusFromError(ctx, err)
}

// Tune searches the grid of settings and streams progress, then the
// recommendation.
func (h *simulationServer) Tune(req *pb.TuneRequest, stream pb.SimulationService_TuneServer) error {
	s := h.s
	ctx := stream.Context()
	start := time.Now()
	treq, cost, vs := s.checkTune(req)
	if len(vs) > 0 {
		return s.reject(vs)
	}
	release, err := s.admit(ctx, "Tune", cost)
	if err != nil {
		return err
	}
	defer release()
	s.hook(ctx, "Tune")

	prog := newSearchProgress(req.GetProgressIntervalMs(), func(m *pb.SearchProgress) error {
		return stream.Send(&pb.TuneResponse{Event: &pb.TuneResponse_Progress{Progress: m}})
	})
	var rec *tune.Recommendation
	err = <-goSafe(s.cfg.Logger, ctx, func() error {
		var err error
		rec, err = tune.Tune(ctx, treq, tune.Options{Progress: prog.post, Parallelism: s.cfg.EngineParallelism, RunReplication: s.cfg.RunReplication})
		return err
	})
	sendErr := prog.close()
	if err != nil {
		return s.searchError(ctx, err, req.GetAxes(), req.GetConditions())
	}
	if sendErr != nil {
		return statusFromError(ctx, sendErr)
	}
	wall := time.Since(start)
	s.countSearch(ctx, rec.Effort.UserSlots, wall)
	return statusFromError(ctx, stream.Send(&pb.TuneResponse{Event: &pb.TuneResponse_Recommendation{
		Recommendation: RecommendationToProto(rec, wall)}}))
}

// Capacity bisects the group's user count and streams progress, then the
// result.
func (h *simulationServer) Capacity(req *pb.CapacityRequest, stream pb.SimulationService_CapacityServer) error {
	s := h.s
	ctx := stream.Context()
	start := time.Now()
	creq, vs := s.checkCapacity(req)
	if len(vs) > 0 {
		return s.reject(vs)
	}
	release, err := s.admit(ctx, "Capacity", tune.CapacityCost(creq).TapSlots)
	if err != nil {
		return err
	}
	defer release()
	s.hook(ctx, "Capacity")

	prog := newSearchProgress(req.GetProgressIntervalMs(), func(m *pb.SearchProgress) error {
		return stream.Send(&pb.CapacityResponse{Event: &pb.CapacityResponse_Progress{Progress: m}})
	})
	var res *tune.CapacityResult
	err = <-goSafe(s.cfg.Logger, ctx, func() error {
		var err error
		res, err = tune.Capacity(ctx, creq, tune.Options{Progress: prog.post, Parallelism: s.cfg.EngineParallelism, RunReplication: s.cfg.RunReplication})
		return err
	})
	sendErr := prog.close()
	if err != nil {
		return s.searchError(ctx, err, nil, nil)
	}
	if sendErr != nil {
		return statusFromError(ctx, sendErr)
	}
	wall := time.Since(start)
	s.countSearch(ctx, res.UserSlots, wall)
	return statusFromError(ctx, stream.Send(&pb.CapacityResponse{Event: &pb.CapacityResponse_Result{
		Result: CapacityResultToProto(res, wall)}}))
}

// checkAxisForms checks that every axis lists values, lists names or gives
// a range (count >= 1), only one of them.
func checkAxisForms(axes []*pb.SweepAxis) []Violation {
	var vs []Violation
	for i, a := range axes {
		switch {
		case len(a.GetValues()) == 0 && len(a.GetNames()) == 0 && a.GetCount() == 0:
			vs = append(vs, Violation{Field: fmt.Sprintf("axes[%d].values", i),
				Description: fmt.Sprintf("must list 1 to %d values or names, or give a range instead (first, last, count >= 1)", tune.MaxAxisValues)})
		case len(a.GetValues()) > 0 && len(a.GetNames()) > 0:
			vs = append(vs, Violation{Field: fmt.Sprintf("axes[%d].names", i),
				Description: "give either values or names, not both"})
		case (len(a.GetValues()) > 0 || len(a.GetNames()) > 0) && a.GetCount() != 0:
			vs = append(vs, Violation{Field: fmt.Sprintf("axes[%d].count", i),
				Description: "give either listed values (or names) or a range (first, last, count), not both"})
		}
	}
	return vs
}
