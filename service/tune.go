package service

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"sync"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
	"github.com/fadeloop/fadeloop/loop/tune"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// This file serves SimulationService.Tune and SimulationService.Capacity
// on top of package loop/tune, with the validation, cost bound, admission,
// cancellation and error mapping of Simulate and Sweep.

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

// convertSearch checks a Tune or Capacity request's .proto rules, converts
// it once (conv) and validates the base scenario of the conversion (a
// normalised copy, reporting at "base.…").
func convertSearch[R any](s *Server, req interface {
	proto.Message
	GetBase() *pb.Scenario
}, conv func() R, base func(R) loop.Scenario) (R, []Violation) {
	var out R
	vs := s.validator.check(req, "")
	if req.GetBase() == nil {
		if len(vs) == 0 {
			vs = append(vs, Violation{Field: "base", Description: "value is required"})
		}
		return out, vs
	}
	out = conv()
	b := base(out).Clone()
	b.Normalise()
	bvs, _ := violationsOf(multicell.Validate(b).Err(), "base.")
	return out, mergeViolations(vs, bvs)
}

// checkTune validates a Tune request before any work, converting it once:
// the .proto rules, the base scenario, then tune.PlanTune: the tuner's own
// rules for the axes, conditions, objective and budget, and the bound on
// its work, without building a candidate. It also bounds the size of the
// answer (tuneResponseBytes) by the server's message limit. It returns the
// tuner's plan, which the handler runs after admission.
func (s *Server) checkTune(req *pb.TuneRequest) (*tune.TunePlan, []Violation) {
	treq, vs := convertSearch(s, req, func() tune.Request { return TuneRequestFromProto(req) },
		func(r tune.Request) loop.Scenario { return r.Base })
	if len(vs) > 0 {
		return nil, vs
	}
	if vs := checkAxisForms(req.GetAxes()); len(vs) > 0 {
		return nil, vs
	}
	plan, err := tune.PlanTune(treq)
	if err != nil {
		if tvs, ok := searchViolations(err, req.GetAxes(), req.GetConditions()); ok {
			return nil, tvs
		}
		return nil, []Violation{{Field: "axes", Description: err.Error()}}
	}
	cost := plan.Cost()
	if n, limit := tuneResponseBytes(treq, cost.Points), int64(s.cfg.MaxSendMessageBytes); n > limit {
		return nil, []Violation{{Field: "axes", Description: fmt.Sprintf(
			"the recommendation for %d candidates × %d conditions would take about %d bytes, more than the server's maximum message size %d; use fewer candidates or conditions",
			cost.Points, max(len(treq.Conditions), 1), n, limit)}}
	}
	return plan, nil
}

// tuneResponseBytes bounds the encoded size of the Recommendation of a
// Tune over k candidates: every candidate's grid point, its overall row
// and, per condition, its row with every figure, each sized by encoding a
// worst-case row (every number set, the longest axis names), plus the
// per-condition parts and a margin for the texts.
func tuneResponseBytes(req tune.Request, k int64) int64 {
	est := &pb.ReplicationEstimate{Mean: 1.5, Low: 1.5, High: 1.5, N: 1 << 30}
	fig := &pb.TuneFigures{SirErrorMeanDb: est, SirErrorStdDb: est, OutageProbability: est, AchievedBler: est,
		BlerTarget: 0.1, TxPowerMeanDbm: est, MaxPowerFraction: est, NoiseRiseMeanDb: est, InfeasibleReplications: 1 << 30, OtherToOwn: est}
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

// checkCapacity validates a Capacity request before any work, converting
// it once: the .proto rules, the base scenario, then the capacity search's
// own rules and the bound on its work (tune.PlanCapacity, which runs
// nothing). It returns the plan, which the handler runs after admission.
func (s *Server) checkCapacity(req *pb.CapacityRequest) (*tune.CapacityPlan, []Violation) {
	creq, vs := convertSearch(s, req, func() tune.CapacityRequest { return CapacityRequestFromProto(req) },
		func(r tune.CapacityRequest) loop.Scenario { return r.Base })
	if len(vs) > 0 {
		return nil, vs
	}
	plan, err := tune.PlanCapacity(creq)
	if err != nil {
		if tvs, ok := searchViolations(err, nil, nil); ok {
			return nil, tvs
		}
		return nil, []Violation{{Field: "base", Description: err.Error()}}
	}
	return plan, nil
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
	*latestSender[*pb.SearchProgress]
	start    time.Time
	interval time.Duration
	mu       sync.Mutex
	last     time.Time
}

func newSearchProgress(intervalMs int32, send func(*pb.SearchProgress) error) *searchProgress {
	p := &searchProgress{latestSender: newLatestSender(send), start: time.Now(), interval: DefaultProgressInterval}
	if intervalMs > 0 {
		p.interval = time.Duration(intervalMs) * time.Millisecond
	}
	return p
}

// post is the tune.Options.Progress callback. The last event of a search
// (fraction done 1) is always forwarded.
func (p *searchProgress) post(tp tune.SearchProgress) {
	now := time.Now()
	p.mu.Lock()
	if tp.FractionDone < 1 && !p.last.IsZero() && now.Sub(p.last) < p.interval {
		p.mu.Unlock()
		return
	}
	p.last = now
	p.mu.Unlock()
	p.latestSender.post(&pb.SearchProgress{
		Stage:               i32(tp.Stage),
		CandidatesRemaining: i32(tp.CandidatesRemaining),
		ReplicationsDone:    int64(tp.ReplicationsDone),
		UserSlotsDone:       tp.UserSlotsDone,
		ElapsedS:            now.Sub(p.start).Seconds(),
		FractionDone:        tp.FractionDone,
	})
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

// searchCall is one checked Tune or Capacity call: its cost and how to
// run its plan, count its work and send its progress and answer.
type searchCall[R any] struct {
	method       string
	cost         int64 // tap-slots
	intervalMs   int32
	run          func(ctx context.Context, opt tune.Options) (R, error)
	userSlots    func(R) int64
	sendProgress func(*pb.SearchProgress) error
	sendAnswer   func(ans R, wall time.Duration) error
	// axes and conds map violations found while running (searchViolations).
	axes  []*pb.SweepAxis
	conds []*pb.Condition
}

// serveSearch admits a checked search, runs it with its progress on the
// stream, and sends its answer; start is when the call began.
func serveSearch[R any](ctx context.Context, s *Server, start time.Time, c searchCall[R]) error {
	release, err := s.admit(ctx, c.method, c.cost)
	if err != nil {
		return err
	}
	defer release()
	s.hook(ctx, c.method)

	prog := newSearchProgress(c.intervalMs, c.sendProgress)
	var ans R
	err = <-goSafe(s.cfg.Logger, ctx, func() error {
		var err error
		ans, err = c.run(ctx, tune.Options{Progress: prog.post, Parallelism: s.cfg.EngineParallelism, RunReplication: s.cfg.RunReplication})
		return err
	})
	sendErr := prog.close()
	if err != nil {
		return s.searchError(ctx, err, c.axes, c.conds)
	}
	if sendErr != nil {
		return statusFromError(ctx, sendErr)
	}
	wall := time.Since(start)
	s.countSearch(ctx, c.userSlots(ans), wall)
	return statusFromError(ctx, c.sendAnswer(ans, wall))
}

// Tune searches the grid of settings and streams progress, then the
// recommendation.
func (h *simulationServer) Tune(req *pb.TuneRequest, stream pb.SimulationService_TuneServer) error {
	start := time.Now()
	plan, vs := h.s.checkTune(req)
	if len(vs) > 0 {
		return h.s.reject(vs)
	}
	return serveSearch(stream.Context(), h.s, start, searchCall[*tune.Recommendation]{
		method: "Tune", cost: plan.Cost().TapSlots, intervalMs: req.GetProgressIntervalMs(),
		run:       plan.Run,
		userSlots: func(r *tune.Recommendation) int64 { return r.Effort.UserSlots },
		sendProgress: func(m *pb.SearchProgress) error {
			return stream.Send(&pb.TuneResponse{Event: &pb.TuneResponse_Progress{Progress: m}})
		},
		sendAnswer: func(r *tune.Recommendation, wall time.Duration) error {
			return stream.Send(&pb.TuneResponse{Event: &pb.TuneResponse_Recommendation{Recommendation: RecommendationToProto(r, wall)}})
		},
		axes: req.GetAxes(), conds: req.GetConditions(),
	})
}

// Capacity bisects the group's user count and streams progress, then the
// result.
func (h *simulationServer) Capacity(req *pb.CapacityRequest, stream pb.SimulationService_CapacityServer) error {
	start := time.Now()
	plan, vs := h.s.checkCapacity(req)
	if len(vs) > 0 {
		return h.s.reject(vs)
	}
	return serveSearch(stream.Context(), h.s, start, searchCall[*tune.CapacityResult]{
		method: "Capacity", cost: plan.Cost().TapSlots, intervalMs: req.GetProgressIntervalMs(),
		run:       plan.Run,
		userSlots: func(r *tune.CapacityResult) int64 { return r.UserSlots },
		sendProgress: func(m *pb.SearchProgress) error {
			return stream.Send(&pb.CapacityResponse{Event: &pb.CapacityResponse_Progress{Progress: m}})
		},
		sendAnswer: func(r *tune.CapacityResult, wall time.Duration) error {
			return stream.Send(&pb.CapacityResponse{Event: &pb.CapacityResponse_Result{Result: CapacityResultToProto(r, wall)}})
		},
	})
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
