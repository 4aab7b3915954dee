package service

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"net"
	"strings"
	"sync"
	"time"

	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/peer"
	"google.golang.org/grpc/status"
)

// clientShare bounds the Lockstep streams one client (peer IP address) may
// hold at once: a share of max_lockstep_streams, so that one client opening
// streams and leaving them idle cannot lock every other client out.
type clientShare struct {
	mu    sync.Mutex
	open  map[string]int
	limit int
	retry time.Duration
}

func newClientShare(limit int, retry time.Duration) *clientShare {
	return &clientShare{open: map[string]int{}, limit: limit, retry: retry}
}

// acquire takes one stream of client's share, or returns RESOURCE_EXHAUSTED.
func (c *clientShare) acquire(client string) (func(), error) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.open[client] >= c.limit {
		return nil, overloaded(fmt.Sprintf(
			"too many Lockstep streams from this client: %d open (max_lockstep_streams_per_client); close one or retry later", c.limit), c.retry)
	}
	c.open[client]++
	return func() {
		c.mu.Lock()
		defer c.mu.Unlock()
		if c.open[client]--; c.open[client] <= 0 {
			delete(c.open, client)
		}
	}, nil
}

// peerKey is the client identity of a call for per-client shares: the
// peer's IP address (all connections of one host share it), or the whole
// address when it has no host part (in-memory transports).
func peerKey(ctx context.Context) string {
	p, ok := peer.FromContext(ctx)
	if !ok || p.Addr == nil {
		return ""
	}
	a := p.Addr.String()
	if h, _, err := net.SplitHostPort(a); err == nil {
		return h
	}
	return a
}

// loopServer implements fadeloop.v1.LoopService.
type loopServer struct {
	pb.UnimplementedLoopServiceServer
	s *Server
}

// lockstepSession is one configured Lockstep stream.
type lockstepSession struct {
	ctls    []*loop.Controller
	next    int64 // slot index expected next
	blockAt []int64
	errs    []bool
	resp    *pb.LockstepResponse
}

// newLockstepSession validates the configuration and builds one
// controller per user. Users' settings are normalised like a scenario's
// (zero fields take the engine's defaults).
func (s *Server) newLockstepSession(req *pb.LockstepRequest) (*lockstepSession, []Violation) {
	if vs := s.validator.check(req, ""); len(vs) > 0 {
		return nil, vs
	}
	cfg := req.GetConfig()
	rcv := receiverFromProto(cfg.GetReceiver())
	var vs []Violation
	sess := &lockstepSession{}
	n := len(cfg.GetUsers())
	for i, u := range cfg.GetUsers() {
		sc := loop.Scenario{
			Receiver:  rcv,
			InnerLoop: innerLoopFromProto(u.GetInnerLoop()),
			OuterLoop: outerLoopFromProto(u.GetOuterLoop()),
		}
		sc.Normalise()
		ctl, err := loop.NewController(sc.InnerLoop, sc.OuterLoop, sc.Receiver, u.GetPathLossDb(), cfg.GetSeed(), i)
		if err != nil {
			vs = append(vs, controllerViolations(err, i)...)
			continue
		}
		sess.ctls = append(sess.ctls, ctl)
	}
	if len(vs) > 0 {
		return nil, vs
	}
	sess.blockAt = make([]int64, n)
	for i := range sess.blockAt {
		sess.blockAt[i] = -1
	}
	sess.errs = make([]bool, n)
	sess.resp = &pb.LockstepResponse{
		CommandDb:  make([]float64, n),
		TxPowerDbm: make([]float64, n),
		TargetDb:   make([]float64, n),
	}
	return sess, nil
}

// controllerViolations maps loop.NewController's violations of user i to
// request field paths.
func controllerViolations(err error, i int) []Violation {
	user := fmt.Sprintf("config.users[%d].", i)
	var lvs loop.Violations
	if !errors.As(err, &lvs) {
		return []Violation{{Field: strings.TrimSuffix(user, "."), Description: err.Error()}}
	}
	out := make([]Violation, len(lvs))
	for j, v := range lvs {
		field := user + v.Field
		if strings.HasPrefix(v.Field, "receiver.") {
			field = "config." + v.Field
		}
		out[j] = Violation{Field: field, Description: v.Rule}
	}
	return out
}

// checkSlot validates one slot message against the session: the .proto
// rules (finite SIRs in range, non-negative indices) are checked here by
// hand, on the hot path, with the same bounds.
func (sess *lockstepSession) checkSlot(m *pb.LockstepSlot) []Violation {
	var vs []Violation
	if m.GetSlot() != sess.next {
		vs = append(vs, Violation{Field: "slot.slot", Description: fmt.Sprintf(
			"slots must arrive in order: expected slot %d, got %d", sess.next, m.GetSlot())})
	}
	sir := m.GetSirDb()
	if len(sir) != len(sess.ctls) {
		vs = append(vs, Violation{Field: "slot.sir_db", Description: fmt.Sprintf(
			"wrong user count: %d SIR values for %d configured users", len(sir), len(sess.ctls))})
	}
	for i, x := range sir {
		if !(x >= -100 && x <= 100) {
			vs = append(vs, Violation{Field: fmt.Sprintf("slot.sir_db[%d]", i), Description: fmt.Sprintf(
				"must be finite and in [-100, 100] dB, got %g", x)})
		}
	}
	for j, b := range m.GetBlocks() {
		u := b.GetUser()
		switch {
		case u < 0 || int(u) >= len(sess.ctls):
			vs = append(vs, Violation{Field: fmt.Sprintf("slot.blocks[%d].user", j), Description: fmt.Sprintf(
				"must be a configured user in [0, %d), got %d", len(sess.ctls), u)})
		case sess.blockAt[u] == m.GetSlot():
			vs = append(vs, Violation{Field: fmt.Sprintf("slot.blocks[%d].user", j), Description: fmt.Sprintf(
				"user %d has more than one block result in slot %d", u, m.GetSlot())})
		default:
			sess.blockAt[u] = m.GetSlot()
		}
	}
	return vs
}

// step runs every controller for one validated slot and fills the response.
func (sess *lockstepSession) step(m *pb.LockstepSlot) *pb.LockstepResponse {
	for _, b := range m.GetBlocks() {
		sess.errs[b.GetUser()] = b.GetError()
	}
	sir := m.GetSirDb()
	r := sess.resp
	slot := m.GetSlot()
	for i, c := range sess.ctls {
		var blockErr *bool
		if sess.blockAt[i] == slot {
			blockErr = &sess.errs[i]
		}
		d := c.Step(sir[i], blockErr)
		r.CommandDb[i], r.TxPowerDbm[i], r.TargetDb[i] = d.CommandDB, d.PowerDBm, d.TargetDB
	}
	r.Slot = slot
	sess.next++
	return r
}

// Lockstep runs the controllers of an external simulator slot by slot.
func (l *loopServer) Lockstep(stream pb.LoopService_LockstepServer) error {
	s := l.s
	ctx := stream.Context()
	release, err := s.lockstep.acquire()
	if err != nil {
		s.metrics.rejected.WithLabelValues("busy").Inc()
		return err
	}
	defer release()
	// Released before the server-wide place (deferred calls run last
	// first): once the server-wide count drops, the client's share has.
	releaseClient, err := s.perClient.acquire(peerKey(ctx))
	if err != nil {
		s.metrics.rejected.WithLabelValues("busy").Inc()
		return err
	}
	defer releaseClient()
	// A shutdown ends the stream (its client reconnects elsewhere); an idle
	// client is cut after StreamIdleTimeout. Both free the stream's place.
	stopDrain := context.AfterFunc(s.drainCtx, func() {
		endStream(ctx, status.Error(codes.Unavailable, "server is shutting down; reconnect (to another replica) and resend the configuration"))
	})
	defer stopDrain()
	idleTimeout := s.cfg.StreamIdleTimeout
	idle := time.AfterFunc(idleTimeout, func() {
		endStream(ctx, status.Errorf(codes.DeadlineExceeded,
			"no Lockstep message from the client for %s (stream_idle_timeout); stream closed", idleTimeout))
	})
	defer idle.Stop()
	s.hook(ctx, "Lockstep")

	first, err := stream.Recv()
	if errors.Is(err, io.EOF) {
		return s.reject([]Violation{{Field: "config", Description: "the stream ended before the configuration message"}})
	}
	if err != nil {
		return statusFromError(ctx, err)
	}
	if first.GetConfig() == nil {
		return s.reject([]Violation{{Field: "config", Description: "the first message must carry the configuration (config), not a slot"}})
	}
	sess, vs := s.newLockstepSession(first)
	if len(vs) > 0 {
		return s.reject(vs)
	}
	ci := infoFrom(ctx)
	ci.cost.Store(int64(len(sess.ctls)))
	// The idle timer runs while the stream waits for the client: in Recv
	// for its next slot, and in Send when it does not read the replies.
	for {
		idle.Reset(idleTimeout)
		req, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return nil
		}
		if err != nil {
			return statusFromError(ctx, err)
		}
		slot := req.GetSlot()
		if slot == nil {
			if req.GetConfig() != nil {
				return s.reject([]Violation{{Field: "config", Description: "the configuration may be sent only once, as the first message"}})
			}
			return s.reject([]Violation{{Field: "slot", Description: "message carries neither config nor slot"}})
		}
		if vs := sess.checkSlot(slot); len(vs) > 0 {
			return s.reject(vs)
		}
		err = stream.Send(sess.step(slot))
		idle.Stop()
		if err != nil {
			return statusFromError(ctx, err)
		}
		ci.userSlots.Add(int64(len(sess.ctls)))
		s.metrics.lockstepSlots.Inc()
		if sess.next == math.MaxInt64 {
			return status.Error(codes.OutOfRange, "slot index space exhausted")
		}
	}
}
