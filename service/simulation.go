package service

import (
	"context"
	"fmt"
	"log/slog"
	"time"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
	"github.com/fadeloop/fadeloop/loop/tune"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// simulationServer implements fadeloop.v1.SimulationService.
type simulationServer struct {
	pb.UnimplementedSimulationServiceServer
	s *Server
}

// maxTraceUsers is the engine's limit on traced users.
const maxTraceUsers = loop.MaxTracedUsers

// traceOptions converts the request's trace options for a scenario with n
// users and slots slots per replication, checking that the traces fit in
// one message of maxBytes.
func traceOptions(m *pb.TraceOptions, n int, slots int64, maxBytes int) (loop.TraceOptions, []Violation) {
	topts := loop.TraceOptions{Decimation: int(m.GetDecimationSlots()), SamplesPerUser: int(m.GetSamplesPerUser())}
	if topts.Decimation == 0 && topts.SamplesPerUser == 0 {
		return loop.TraceOptions{}, nil
	}
	d := topts.DecimationFor(slots)
	var vs []Violation
	users := make([]int, 0, len(m.GetUsers()))
	for i, u := range m.GetUsers() {
		if int(u) >= n {
			vs = append(vs, Violation{Field: fmt.Sprintf("traces.users[%d]", i), Description: fmt.Sprintf(
				"must be a user index in [0, %d), got %d", n, u)})
		}
		users = append(users, int(u))
	}
	if len(users) == 0 {
		for u := range min(n, maxTraceUsers) {
			users = append(users, u)
		}
	}
	// Each traced sample costs 8 (slot) + 4·4 (float32s) bytes, plus framing.
	samples := int64(len(users)) * (slots/int64(d) + 1)
	if bytes := samples * 26; bytes > int64(maxBytes)/2 {
		field := "traces.decimation_slots"
		if topts.Decimation == 0 {
			field = "traces.samples_per_user"
		}
		vs = append(vs, Violation{Field: field, Description: fmt.Sprintf(
			"traces of %d users at one sample every %d slots take about %d bytes, more than half the server's maximum message size %d; raise the decimation, ask for fewer samples or trace fewer users",
			len(users), d, bytes, maxBytes)})
	}
	topts.Users = users
	return topts, vs
}

// latestSender sends values on its own goroutine through a one-slot
// mailbox, so that a slow reader never stalls the producer: a value not yet
// sent is replaced by a newer one, and the last value posted is always
// sent. post must not be called concurrently.
type latestSender[T any] struct {
	mailbox chan T
	done    chan error
}

func newLatestSender[T any](send func(T) error) *latestSender[T] {
	l := &latestSender[T]{mailbox: make(chan T, 1), done: make(chan error, 1)}
	go func() {
		var err error
		for v := range l.mailbox {
			if err == nil {
				err = send(v)
			}
		}
		l.done <- err
	}()
	return l
}

// post queues v for sending in place of any value not yet sent.
func (l *latestSender[T]) post(v T) {
	for {
		select {
		case l.mailbox <- v:
			return
		default:
		}
		select {
		case <-l.mailbox:
		default:
		}
	}
}

// close sends what is queued, stops the sender and returns its first send
// error.
func (l *latestSender[T]) close() error {
	close(l.mailbox)
	return <-l.done
}

// progressToProto converts an engine progress event.
func progressToProto(p loop.Progress) *pb.Progress {
	return &pb.Progress{
		FractionDone:  p.Fraction,
		UserSlotsDone: p.UserSlots,
		UserSlotsPerS: p.UserSlotsPerS,
		ElapsedS:      p.Elapsed.Seconds(),
	}
}

// Simulate runs one scenario, streaming progress and then the report.
func (h *simulationServer) Simulate(req *pb.SimulateRequest, stream pb.SimulationService_SimulateServer) error {
	s := h.s
	ctx := stream.Context()
	sc, vs := s.checkScenarioRequest(req, req.GetScenario(), "scenario")
	var topts loop.TraceOptions
	if len(vs) == 0 {
		topts, vs = traceOptions(req.GetTraces(), sc.Users(), sc.TotalSlots(), s.cfg.MaxSendMessageBytes)
	}
	if len(vs) > 0 {
		return s.reject(vs)
	}
	release, err := s.admit(ctx, "Simulate", sc.Cost())
	if err != nil {
		return err
	}
	defer release()
	s.hook(ctx, "Simulate")

	interval := DefaultProgressInterval
	if ms := req.GetProgressIntervalMs(); ms > 0 {
		interval = time.Duration(ms) * time.Millisecond
	}
	prog := newLatestSender(func(p *pb.Progress) error {
		return stream.Send(&pb.SimulateResponse{Event: &pb.SimulateResponse_Progress{Progress: p}})
	})
	post := func(p loop.Progress) { prog.post(progressToProto(p)) }
	rep, err := multicell.RunScenario(ctx, sc, loop.RunOptions{Progress: post, ProgressEvery: interval, Trace: topts})
	sendErr := prog.close()
	if err != nil {
		if vs, ok := violationsOf(err, "scenario."); ok {
			return s.reject(vs)
		}
		return statusFromError(ctx, err)
	}
	if sendErr != nil {
		return statusFromError(ctx, sendErr)
	}
	s.countRun(ctx, rep)
	return statusFromError(ctx, stream.Send(&pb.SimulateResponse{Event: &pb.SimulateResponse_Report{Report: ReportToProto(rep)}}))
}

// countRun records a finished run's work in the metrics and the call log.
func (s *Server) countRun(ctx context.Context, rep *loop.Report) {
	infoFrom(ctx).userSlots.Add(rep.SimulatedUserSlots)
	s.metrics.userSlots.Add(float64(rep.SimulatedUserSlots))
	s.metrics.runRate.Set(rep.UserSlotsPerS)
}

// SweepRequestFromProto converts a fadeloop.v1 SweepRequest to the
// domain's sweep request. It does not validate.
func SweepRequestFromProto(m *pb.SweepRequest) tune.SweepRequest {
	r := tune.SweepRequest{
		Base:     ScenarioFromProto(m.GetBase()),
		Indices:  m.GetPointIndices(),
		SeedMode: tune.SeedMode(m.GetSeedMode()),
	}
	for _, a := range m.GetAxes() {
		r.Axes = append(r.Axes, AxisFromProto(a))
	}
	return r
}

// checkSweep validates a sweep request before any work: the .proto rules,
// then tune.PlanSweep (base scenario, axes, each axis value, indices),
// which also bounds the cost without expanding the grid.
func (s *Server) checkSweep(req *pb.SweepRequest) (*tune.SweepPlan, []Violation) {
	if vs := s.validator.check(req, ""); len(vs) > 0 {
		return nil, vs
	}
	if vs := checkAxisForms(req.GetAxes()); len(vs) > 0 {
		return nil, vs
	}
	plan, err := tune.PlanSweep(SweepRequestFromProto(req))
	if err != nil {
		vs, ok := violationsOf(err, "")
		if !ok {
			vs = []Violation{{Field: "axes", Description: err.Error()}}
		}
		return nil, vs
	}
	return plan, nil
}

// sweepPointToProto converts one computed point; without detailed only
// the aggregate, feasibility and run counts of its report are kept.
func sweepPointToProto(p *tune.SweepPoint, detailed bool) *pb.SweepPoint {
	m := ReportToProto(p.Report)
	if !detailed {
		m.Users, m.DistanceBins, m.NormalisedScenario, m.Traces = nil, nil, nil, nil
		if m.Layout != nil {
			m.Layout.UserPoints = nil // per-user, like users
		}
	}
	out := &pb.SweepPoint{Index: p.Index, Seed: p.Seed, Report: m, Label: p.Point.Label()}
	var named bool
	for _, c := range p.Point.Coords {
		out.Coordinates = append(out.Coordinates, c.Value)
		out.CoordinateNames = append(out.CoordinateNames, c.Text)
		named = named || c.Text != ""
	}
	if !named {
		out.CoordinateNames = nil
	}
	return out
}

// Sweep runs the grid points on tune.Sweep's worker pool and streams each
// as it finishes. The cost is checked before any point is built; the
// check of every point's scenario runs inside admission, under the call's
// context.
func (h *simulationServer) Sweep(req *pb.SweepRequest, stream pb.SimulationService_SweepServer) error {
	s := h.s
	ctx := stream.Context()
	plan, vs := s.checkSweep(req)
	if len(vs) > 0 {
		return s.reject(vs)
	}
	release, err := s.admit(ctx, "Sweep", plan.Cost().TapSlots)
	if err != nil {
		return err
	}
	defer release()
	s.hook(ctx, "Sweep")

	var sum tune.SweepSummary
	err = <-goSafe(s.cfg.Logger, ctx, func() error {
		var err error
		sum, err = tune.Sweep(ctx, plan, tune.SweepOptions{Parallelism: s.cfg.EngineParallelism, Check: true},
			func(p *tune.SweepPoint) error {
				s.countRun(ctx, p.Report)
				return stream.Send(&pb.SweepResponse{Event: &pb.SweepResponse_Point{Point: sweepPointToProto(p, req.GetDetailed())}})
			})
		return err
	})
	if err != nil {
		if vs, ok := violationsOf(err, ""); ok {
			return s.reject(vs)
		}
		s.cfg.Logger.DebugContext(ctx, "sweep stopped", slog.Int64("points_started", sum.PointsStarted),
			slog.Int64("points_computed", sum.PointsComputed), slog.String("cause", err.Error()))
		return statusFromError(ctx, err)
	}
	wall := sum.Wall.Seconds()
	out := &pb.SweepSummary{
		GridPoints:         sum.GridPoints,
		PointsComputed:     sum.PointsComputed,
		WallTimeS:          wall,
		SimulatedUserSlots: sum.UserSlots,
	}
	if wall > 0 {
		out.UserSlotsPerS = float64(sum.UserSlots) / wall
	}
	return statusFromError(ctx, stream.Send(&pb.SweepResponse{Event: &pb.SweepResponse_Summary{Summary: out}}))
}

func satAdd(a, b int64) int64 {
	if a > 1<<63-1-b {
		return 1<<63 - 1
	}
	return a + b
}
