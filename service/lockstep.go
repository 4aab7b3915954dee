package service

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"net"
	"strconv"
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

// maxLockstepUsers bounds a Lockstep stream's users, configured and
// joined together (LockstepConfig.users max_items).
const maxLockstepUsers = 4096

// lockstepSession is one configured Lockstep stream.
type lockstepSession struct {
	ctls      []*loop.Controller
	rcv       loop.Receiver
	seed      uint64
	next      int64 // slot index expected next
	replyErrs bool  // reply_on_slot_error
	// Per-user marks of the slot being checked, stamped with gen so that a
	// refused message leaves no trace: block result, inactive, leaving.
	gen                       int64
	blockAt, inactAt, leaveAt []int64
	errs                      []bool
	left                      []bool
	joining                   []*loop.Controller // built by checkSlot, added by step
	states                    []pb.LockstepUserState
	anyState                  bool // some user was not ACTIVE in some slot: user_state is sent
	resp                      *pb.LockstepResponse
}

// newLockstepSession validates the configuration and builds one
// controller per user. Users' settings are normalised like a scenario's
// (zero fields take the engine's defaults).
func (s *Server) newLockstepSession(req *pb.LockstepRequest) (*lockstepSession, []Violation) {
	if vs := s.validator.check(req, ""); len(vs) > 0 {
		return nil, vs
	}
	cfg := req.GetConfig()
	sess := &lockstepSession{
		rcv:       receiverFromProto(cfg.GetReceiver()),
		seed:      cfg.GetSeed(),
		replyErrs: cfg.GetReplyOnSlotError(),
		resp:      &pb.LockstepResponse{},
	}
	var vs []Violation
	for i, u := range cfg.GetUsers() {
		ctl, err := sess.newController(u, i)
		if err != nil {
			vs = append(vs, controllerViolations(err, fmt.Sprintf("config.users[%d].", i))...)
			continue
		}
		sess.ctls = append(sess.ctls, ctl)
	}
	if len(vs) > 0 {
		return nil, vs
	}
	sess.grow(len(sess.ctls))
	return sess, nil
}

// newController builds user i's controller from its settings, normalised
// like a scenario's; its random streams are those of user index i.
func (sess *lockstepSession) newController(u *pb.LockstepUser, i int) (*loop.Controller, error) {
	sc := loop.Scenario{
		Receiver:  sess.rcv,
		InnerLoop: innerLoopFromProto(u.GetInnerLoop()),
		OuterLoop: outerLoopFromProto(u.GetOuterLoop()),
	}
	sc.Normalise()
	return loop.NewController(sc.InnerLoop, sc.OuterLoop, sc.Receiver, u.GetPathLossDb(), sess.seed, i)
}

// grow extends the per-user state to n users (joins happen rarely; the
// per-slot path does not allocate).
func (sess *lockstepSession) grow(n int) {
	for len(sess.blockAt) < n {
		sess.blockAt = append(sess.blockAt, -1)
		sess.inactAt = append(sess.inactAt, -1)
		sess.leaveAt = append(sess.leaveAt, -1)
		sess.errs = append(sess.errs, false)
		sess.left = append(sess.left, false)
		sess.states = append(sess.states, pb.LockstepUserState_LOCKSTEP_USER_STATE_ACTIVE)
	}
	r := sess.resp
	for len(r.CommandDb) < n {
		r.CommandDb = append(r.CommandDb, 0)
		r.TxPowerDbm = append(r.TxPowerDbm, 0)
		r.TargetDb = append(r.TargetDb, 0)
	}
}

// controllerViolations maps loop.NewController's violations of one user
// (request path prefix, e.g. "config.users[3].") to request field paths.
func controllerViolations(err error, prefix string) []Violation {
	var lvs loop.Violations
	if !errors.As(err, &lvs) {
		return []Violation{{Field: strings.TrimSuffix(prefix, "."), Description: err.Error()}}
	}
	out := make([]Violation, len(lvs))
	for j, v := range lvs {
		field := prefix + v.Field
		if strings.HasPrefix(v.Field, "receiver.") {
			field = "config." + v.Field
		}
		out[j] = Violation{Field: field, Description: v.Rule}
	}
	return out
}

// checkSlot validates one slot message against the session without
// changing any controller: the .proto rules (finite SIRs in range,
// non-negative indices) are checked here by hand, on the hot path, with the
// same bounds. Joining users' controllers are built into sess.joining.
func (s *Server) checkSlot(sess *lockstepSession, m *pb.LockstepSlot) []Violation {
	var vs []Violation
	sess.gen++
	gen := sess.gen
	n := len(sess.ctls)
	if m.GetSlot() != sess.next {
		vs = append(vs, Violation{Field: "slot.slot", Description: fmt.Sprintf(
			"slots must arrive in order: expected slot %d, got %d", sess.next, m.GetSlot())})
	}
	// userIndex checks entry j of an index list (field slot.<list>[j]<sub>)
	// and stamps it in at. Field names are formatted only for a violation.
	userIndex := func(list string, j int, sub string, u int32, at []int64) bool {
		switch {
		case u < 0 || int(u) >= n:
			vs = append(vs, Violation{Field: listField(list, j) + sub, Description: fmt.Sprintf(
				"must be a user index in [0, %d), got %d", n, u)})
		case at[u] == gen:
			vs = append(vs, Violation{Field: listField(list, j) + sub, Description: fmt.Sprintf(
				"user %d is listed more than once in %s", u, list)})
		default:
			at[u] = gen
			return true
		}
		return false
	}
	for j, u := range m.GetInactiveUsers() {
		userIndex("inactive_users", j, "", u, sess.inactAt)
	}
	for j, u := range m.GetLeaveUsers() {
		if userIndex("leave_users", j, "", u, sess.leaveAt) && sess.left[u] {
			vs = append(vs, Violation{Field: listField("leave_users", j), Description: fmt.Sprintf("user %d has already left", u)})
		}
	}
	sir := m.GetSirDb()
	if len(sir) != n {
		vs = append(vs, Violation{Field: "slot.sir_db", Description: fmt.Sprintf(
			"wrong user count: %d SIR values for %d users (configured and joined, left ones included)", len(sir), n)})
	}
	for i, x := range sir {
		if i < n && (sess.left[i] || sess.inactAt[i] == gen) {
			continue // ignored
		}
		if !(x >= -100 && x <= 100) {
			vs = append(vs, Violation{Field: listField("sir_db", i), Description: fmt.Sprintf(
				"must be finite and in [-100, 100] dB, got %g", x)})
		}
	}
	for j, b := range m.GetBlocks() {
		u := b.GetUser()
		if !userIndex("blocks", j, ".user", u, sess.blockAt) {
			continue
		}
		switch {
		case sess.left[u]:
			vs = append(vs, Violation{Field: listField("blocks", j) + ".user", Description: fmt.Sprintf("user %d has left; no block result is accepted", u)})
		case sess.inactAt[u] == gen:
			vs = append(vs, Violation{Field: listField("blocks", j) + ".user", Description: fmt.Sprintf("user %d is inactive in slot %d (inactive_users); no block can end", u, m.GetSlot())})
		}
	}
	sess.joining = sess.joining[:0]
	if js := m.GetJoinUsers(); len(js) > 0 {
		if n+len(js) > maxLockstepUsers {
			vs = append(vs, Violation{Field: "slot.join_users", Description: fmt.Sprintf(
				"%d users would join %d: at most %d users per stream", len(js), n, maxLockstepUsers)})
			return vs
		}
		for j, u := range js {
			prefix := fmt.Sprintf("slot.join_users[%d].", j)
			if jv := s.validator.check(u, prefix); len(jv) > 0 {
				vs = append(vs, jv...)
				continue
			}
			ctl, err := sess.newController(u, n+j)
			if err != nil {
				vs = append(vs, controllerViolations(err, prefix)...)
				continue
			}
			sess.joining = append(sess.joining, ctl)
		}
	}
	return vs
}

// listField is the path of entry j of the slot's repeated field list,
// e.g. "slot.sir_db[3]".
func listField(list string, j int) string {
	return "slot." + list + "[" + strconv.Itoa(j) + "]"
}

// step runs every controller for one validated slot and fills the response.
func (sess *lockstepSession) step(m *pb.LockstepSlot) *pb.LockstepResponse {
	gen := sess.gen
	for _, b := range m.GetBlocks() {
		sess.errs[b.GetUser()] = b.GetError()
	}
	sir := m.GetSirDb()
	r := sess.resp
	slot := m.GetSlot()
	notActive := len(m.GetInactiveUsers()) > 0 || len(m.GetLeaveUsers()) > 0 || len(sess.joining) > 0
	for i, c := range sess.ctls {
		st := pb.LockstepUserState_LOCKSTEP_USER_STATE_ACTIVE
		switch {
		case sess.left[i]:
			r.CommandDb[i] = 0
			st = pb.LockstepUserState_LOCKSTEP_USER_STATE_LEFT
		case sess.inactAt[i] == gen:
			d := c.StepInactive()
			r.CommandDb[i], r.TxPowerDbm[i], r.TargetDb[i] = d.CommandDB, d.PowerDBm, d.TargetDB
			st = pb.LockstepUserState_LOCKSTEP_USER_STATE_INACTIVE
		default:
			var blockErr *bool
			if sess.blockAt[i] == gen {
				blockErr = &sess.errs[i]
			}
			d := c.Step(sir[i], blockErr)
			r.CommandDb[i], r.TxPowerDbm[i], r.TargetDb[i] = d.CommandDB, d.PowerDBm, d.TargetDB
		}
		if sess.leaveAt[i] == gen {
			sess.left[i] = true
			st = pb.LockstepUserState_LOCKSTEP_USER_STATE_LEFT
		}
		sess.states[i] = st
	}
	if len(sess.joining) > 0 {
		n := len(sess.ctls)
		sess.ctls = append(sess.ctls, sess.joining...)
		sess.joining = sess.joining[:0]
		sess.grow(len(sess.ctls))
		for i := n; i < len(sess.ctls); i++ {
			c := sess.ctls[i]
			r.CommandDb[i], r.TxPowerDbm[i], r.TargetDb[i] = 0, c.PowerDBm(), c.TargetDB()
			sess.states[i] = pb.LockstepUserState_LOCKSTEP_USER_STATE_JOINED
		}
	}
	if notActive {
		sess.anyState = true
	}
	if sess.anyState {
		r.UserState = sess.states
	}
	r.Slot = slot
	sess.next++
	return r
}

// slotErrorReply is the in-stream answer to a refused slot message
// (reply_on_slot_error): the slot index expected (to be sent again) and the
// violations.
func slotErrorReply(slot int64, vs []Violation) *pb.LockstepResponse {
	vs = capViolations(dedupe(vs))
	e := &pb.LockstepSlotError{}
	for _, v := range vs {
		e.Violations = append(e.Violations, &pb.LockstepFieldViolation{Field: v.Field, Description: v.Description})
	}
	return &pb.LockstepResponse{Slot: slot, SlotError: e}
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
	in := newSlotInbox()
	for {
		idle.Reset(idleTimeout)
		in.prepare()
		err := stream.RecvMsg(in)
		if errors.Is(err, io.EOF) {
			return nil
		}
		if err != nil {
			return statusFromError(ctx, err)
		}
		req := in.message()
		slot := req.GetSlot()
		if slot == nil {
			if req.GetConfig() != nil {
				return s.reject([]Violation{{Field: "config", Description: "the configuration may be sent only once, as the first message"}})
			}
			return s.reject([]Violation{{Field: "slot", Description: "message carries neither config nor slot"}})
		}
		if vs := s.checkSlot(sess, slot); len(vs) > 0 {
			if !sess.replyErrs {
				return s.reject(vs)
			}
			// A per-slot data error: answered on the stream, no state changed.
			s.metrics.rejected.WithLabelValues("invalid").Inc()
			err = stream.Send(slotErrorReply(sess.next, vs))
			idle.Stop()
			if err != nil {
				return statusFromError(ctx, err)
			}
			continue
		}
		joined := len(sess.joining) > 0
		err = stream.Send(sess.step(slot))
		if joined {
			ci.cost.Store(int64(len(sess.ctls)))
		}
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
