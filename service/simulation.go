package service

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"sync"
	"time"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// simulationServer implements fadeloop.v1.SimulationService.
type simulationServer struct {
	pb.UnimplementedSimulationServiceServer
	s *Server
}

// maxTraceUsers is the engine's limit on traced users.
const maxTraceUsers = 64

// traceOptions converts the request's trace options for a scenario with n
// users and slots slots per replication, checking that the traces fit in
// one message of maxBytes.
func traceOptions(m *pb.TraceOptions, n int, slots int64, maxBytes int) (loop.TraceOptions, []Violation) {
	d := int(m.GetDecimationSlots())
	if d == 0 {
		return loop.TraceOptions{}, nil
	}
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
		vs = append(vs, Violation{Field: "traces.decimation_slots", Description: fmt.Sprintf(
			"traces of %d users at one sample every %d slots take about %d bytes, more than half the server's maximum message size %d; raise the decimation or trace fewer users",
			len(users), d, bytes, maxBytes)})
	}
	return loop.TraceOptions{Users: users, Decimation: d}, vs
}

// engineViolations maps the violations returned by loop.Run to request
// field paths: scenario fields under prefix, trace options under "traces.".
func engineViolations(err error, prefix string) ([]Violation, bool) {
	var lvs loop.Violations
	if !errors.As(err, &lvs) {
		return nil, false
	}
	out := make([]Violation, len(lvs))
	for i, v := range lvs {
		f := prefix + v.Field
		if strings.HasPrefix(v.Field, "trace.") {
			f = "traces." + strings.TrimPrefix(v.Field, "trace.")
		}
		out[i] = Violation{Field: f, Description: v.Rule}
	}
	return out, true
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
	// Progress events go through a one-slot mailbox to a sender goroutine,
	// so that a slow reader never stalls the engine (older events are
	// replaced by newer ones).
	mailbox := make(chan *pb.Progress, 1)
	sendDone := make(chan error, 1)
	go func() {
		var err error
		for p := range mailbox {
			if err == nil {
				err = stream.Send(&pb.SimulateResponse{Event: &pb.SimulateResponse_Progress{Progress: p}})
			}
		}
		sendDone <- err
	}()
	post := func(p loop.Progress) {
		m := progressToProto(p)
		for {
			select {
			case mailbox <- m:
				return
			default:
			}
			select {
			case <-mailbox:
			default:
			}
		}
	}
	rep, err := multicell.RunScenario(ctx, sc, loop.RunOptions{Progress: post, ProgressEvery: interval, Trace: topts})
	close(mailbox)
	sendErr := <-sendDone
	if err != nil {
		if vs, ok := engineViolations(err, "scenario."); ok {
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

// maxGridPoints bounds the size of a sweep grid.
const maxGridPoints = 1 << 24

// sweepGrid is a validated sweep.
type sweepGrid struct {
	base    *pb.Scenario
	axes    []*pb.SweepAxis
	size    int64
	points  []int64 // indices to compute, ascending request order
	seed    uint64
	perSeed bool
}

// coordinates returns the axis value indices of grid index i (row-major,
// last axis fastest).
func (g *sweepGrid) coordinates(i int64) []int {
	idx := make([]int, len(g.axes))
	for a := len(g.axes) - 1; a >= 0; a-- {
		n := int64(len(g.axes[a].GetValues()))
		idx[a] = int(i % n)
		i /= n
	}
	return idx
}

// pointSeed is the seed of grid point i: the base seed (SEED_MODE_COMMON)
// or SplitMix64 of seed + (i+1)·0x9E3779B97F4A7C15 (SEED_MODE_PER_POINT).
func (g *sweepGrid) pointSeed(i int64) uint64 {
	if !g.perSeed {
		return g.seed
	}
	z := g.seed + uint64(i+1)*0x9E3779B97F4A7C15
	z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9
	z = (z ^ (z >> 27)) * 0x94D049BB133111EB
	return z ^ (z >> 31)
}

// scenario builds grid point i: the base with every axis value set, the
// point's seed, normalised. It returns the engine's violations mapped to
// request fields.
func (g *sweepGrid) scenario(i int64) (loop.Scenario, []Violation) {
	sc := ScenarioFromProto(g.base)
	idx := g.coordinates(i)
	var vs []Violation
	for a, ax := range g.axes {
		if err := loop.SetPath(&sc, ax.GetPath(), ax.GetValues()[idx[a]]); err != nil {
			vs = append(vs, Violation{Field: fmt.Sprintf("axes[%d].values[%d]", a, idx[a]), Description: err.Error()})
		}
	}
	if len(vs) > 0 {
		return sc, vs
	}
	sc.Run.Seed = g.pointSeed(i)
	sc.Normalise()
	for _, v := range sc.Validate() {
		field := "base." + v.Field
		for a, ax := range g.axes {
			if ax.GetPath() == v.Field {
				field = fmt.Sprintf("axes[%d].values[%d]", a, idx[a])
			}
		}
		vs = append(vs, Violation{Field: field, Description: fmt.Sprintf("at grid point %d: %s: %s", i, v.Field, v.Rule)})
	}
	return sc, vs
}

// maxSweepViolations caps the violations reported for one sweep.
const maxSweepViolations = 100

// checkSweep validates a sweep request before any work: the .proto rules,
// the base scenario, every axis path and value, the point indices, and
// every point to compute. It returns the grid and the total cost.
func (s *Server) checkSweep(req *pb.SweepRequest) (*sweepGrid, int64, []Violation) {
	vs := s.validator.check(req, "")
	if len(vs) > 0 {
		return nil, 0, vs
	}
	if _, bvs := domainScenario(req.GetBase(), "base."); len(bvs) > 0 {
		return nil, 0, bvs
	}
	// Range axes (first, last, count) become listed values (tune.go).
	axes, avs := resolveSweepAxes(req.GetAxes())
	if len(avs) > 0 {
		return nil, 0, avs
	}
	g := &sweepGrid{base: req.GetBase(), axes: axes, size: 1,
		seed: req.GetBase().GetRun().GetSeed(), perSeed: req.GetSeedMode() == pb.SeedMode_SEED_MODE_PER_POINT}
	for a, ax := range g.axes {
		probe := ScenarioFromProto(g.base)
		if err := loop.SetPath(&probe, ax.GetPath(), ax.GetValues()[0]); err != nil {
			vs = append(vs, Violation{Field: fmt.Sprintf("axes[%d].path", a), Description: err.Error()})
		}
		g.size = satMul(g.size, int64(len(ax.GetValues())))
	}
	if len(vs) > 0 {
		return nil, 0, vs
	}
	if g.size > maxGridPoints {
		return nil, 0, []Violation{{Field: "axes", Description: fmt.Sprintf(
			"the grid has %d points, more than the limit %d", g.size, maxGridPoints)}}
	}
	if idx := req.GetPointIndices(); len(idx) > 0 {
		for i, p := range idx {
			if p >= g.size {
				vs = append(vs, Violation{Field: fmt.Sprintf("point_indices[%d]", i), Description: fmt.Sprintf(
					"must be a grid index in [0, %d), got %d", g.size, p)})
			}
		}
		g.points = idx
	} else {
		g.points = make([]int64, g.size)
		for i := range g.points {
			g.points[i] = int64(i)
		}
	}
	if len(vs) > 0 {
		return nil, 0, vs
	}
	var cost int64
	for _, p := range g.points {
		sc, pvs := g.scenario(p)
		vs = append(vs, pvs...)
		if len(vs) >= maxSweepViolations {
			vs = append(vs[:maxSweepViolations], Violation{Field: "axes", Description: "more invalid grid points not listed"})
			break
		}
		cost = satAdd(cost, sc.Cost())
	}
	return g, cost, vs
}

func satAdd(a, b int64) int64 {
	if a > 1<<63-1-b {
		return 1<<63 - 1
	}
	return a + b
}

// sweepResult is one finished point.
type sweepResult struct {
	point *pb.SweepPoint
	slots int64
	err   error
}

// Sweep runs the grid points in parallel and streams each as it finishes.
func (h *simulationServer) Sweep(req *pb.SweepRequest, stream pb.SimulationService_SweepServer) error {
	s := h.s
	ctx := stream.Context()
	start := time.Now()
	g, cost, vs := s.checkSweep(req)
	if len(vs) > 0 {
		return s.reject(vs)
	}
	release, err := s.admit(ctx, "Sweep", cost)
	if err != nil {
		return err
	}
	defer release()
	s.hook(ctx, "Sweep")

	runCtx, cancel := context.WithCancel(ctx)
	defer cancel()
	jobs := make(chan int64)
	results := make(chan sweepResult)
	workers := min(s.cfg.EngineParallelism, len(g.points))
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for p := range jobs {
				r := s.sweepPoint(runCtx, g, p, req.GetDetailed())
				select {
				case results <- r:
				case <-runCtx.Done():
					return
				}
			}
		}()
	}
	go func() {
		defer close(jobs)
		for _, p := range g.points {
			select {
			case jobs <- p:
			case <-runCtx.Done():
				return
			}
		}
	}()
	go func() {
		wg.Wait()
		close(results)
	}()
	var done, userSlots int64
	var firstErr error
	for r := range results {
		if firstErr != nil {
			continue
		}
		if r.err == nil {
			r.err = stream.Send(&pb.SweepResponse{Event: &pb.SweepResponse_Point{Point: r.point}})
		}
		if r.err != nil {
			firstErr = r.err
			cancel()
			continue
		}
		done++
		userSlots += r.slots
	}
	if firstErr != nil {
		return statusFromError(ctx, firstErr)
	}
	if err := ctx.Err(); err != nil {
		return statusFromError(ctx, err)
	}
	wall := time.Since(start).Seconds()
	sum := &pb.SweepSummary{
		GridPoints:         g.size,
		PointsComputed:     done,
		WallTimeS:          wall,
		SimulatedUserSlots: userSlots,
	}
	if wall > 0 {
		sum.UserSlotsPerS = float64(userSlots) / wall
	}
	return statusFromError(ctx, stream.Send(&pb.SweepResponse{Event: &pb.SweepResponse_Summary{Summary: sum}}))
}

// sweepPoint runs one grid point; a panic in the engine becomes INTERNAL.
func (s *Server) sweepPoint(ctx context.Context, g *sweepGrid, p int64, detailed bool) (res sweepResult) {
	errc := goSafe(s.cfg.Logger, ctx, func() error {
		sc, vs := g.scenario(p)
		if len(vs) > 0 {
			// Checked before any work; reaching here is a server bug.
			return fmt.Errorf("grid point %d became invalid: %v", p, vs)
		}
		rep, err := multicell.RunScenario(ctx, sc, loop.RunOptions{})
		if err != nil {
			return err
		}
		s.countRun(ctx, rep)
		m := ReportToProto(rep)
		if !detailed {
			m.Users, m.DistanceBins, m.NormalisedScenario, m.Traces = nil, nil, nil, nil
			if m.Layout != nil {
				m.Layout.UserPoints = nil // per-user, like users
			}
		}
		idx := g.coordinates(p)
		coords := make([]float64, len(idx))
		for a, k := range idx {
			coords[a] = g.axes[a].GetValues()[k]
		}
		res.point = &pb.SweepPoint{Index: p, Coordinates: coords, Seed: sc.Run.Seed, Report: m}
		res.slots = rep.SimulatedUserSlots
		return nil
	})
	res.err = <-errc
	return res
}
