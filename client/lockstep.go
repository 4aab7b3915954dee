package client

import (
	"context"
	"errors"
	"io"
	"strconv"
	"strings"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// LockstepSession is an open co-simulation stream: Step or StepSlot sends
// one slot's measurements and returns the service's commands, powers and
// targets for it; Close ends the stream. A session is used by one
// goroutine at a time.
type LockstepSession struct {
	stream pb.LoopService_LockstepClient
	cancel context.CancelFunc
	users  int
	next   int64
	closed bool
	// The request sent, reused: Send serialises it before returning.
	slot pb.LockstepSlot
	req  pb.LockstepRequest
	wrap pb.LockstepRequest_Slot
}

// Lockstep opens a co-simulation session configured by cfg (one controller
// per cfg.Users entry). The client's per-call timeout does not apply (a
// session lives as long as ctx).
//
// With cfg.ReplyOnSlotError a refused slot message keeps the stream and
// every controller's state: StepSlot returns a *LockstepSlotError naming
// the fields, and the same slot is sent again, corrected. Without it the
// service ends the stream with INVALID_ARGUMENT (*InvalidInputError).
func (c *Client) Lockstep(ctx context.Context, cfg *pb.LockstepConfig) (*LockstepSession, error) {
	ctx, cancel := context.WithCancel(ctx)
	stream, err := c.loop.Lockstep(ctx)
	if err != nil {
		cancel()
		return nil, wrapError(err)
	}
	if err := stream.Send(&pb.LockstepRequest{Message: &pb.LockstepRequest_Config{Config: cfg}}); err != nil {
		cancel()
		return nil, sendError(stream, err)
	}
	s := &LockstepSession{stream: stream, cancel: cancel, users: len(cfg.GetUsers())}
	s.wrap.Slot = &s.slot
	s.req.Message = &s.wrap
	return s, nil
}

// Users is the number of user indices of the session: configured users
// plus every user that joined (users that left keep their index). Every
// slot message carries this many SIR values.
func (s *LockstepSession) Users() int { return s.users }

// NextSlot is the slot index the next Step or StepSlot call sends.
func (s *LockstepSession) NextSlot() int64 { return s.next }

// Step sends the measured SIR (dB) of every user for the next slot (0, 1,
// 2, ...) with the CRC results of blocks that ended in it (may be nil), and
// returns the answer for that slot. A slot refused in-stream
// (ReplyOnSlotError) comes back as an answer carrying SlotError, with a nil
// error; StepSlot returns it as a *LockstepSlotError instead.
func (s *LockstepSession) Step(sirDB []float64, blocks []*pb.BlockResult) (*pb.LockstepResponse, error) {
	return s.send(LockstepSlotInput{SIRdB: sirDB, Blocks: blocks})
}

// LockstepSlotInput is one slot's message for StepSlot: measurements,
// block results and changes of the user set. User indices are those of the
// configuration, followed by joined users in the order they joined.
type LockstepSlotInput struct {
	// SIRdB is the measured SIR in dB of each user index, exactly Users()
	// values, each finite and in [-100, 100]. The entries of inactive users
	// and of users that left are placeholders (ignored, any value).
	SIRdB []float64
	// Blocks are the CRC outcomes of blocks that ended in this slot, at
	// most one per user; none for an inactive user or one that left.
	Blocks []*pb.BlockResult
	// Inactive lists users that do not transmit in this slot (DTX, idle):
	// no new command is decided, commands already in the feedback delay
	// line still change the power, the target holds.
	Inactive []int32
	// Join lists users that join after this slot. They take the next
	// indices (Users(), Users()+1, ...), their first transmit power is in
	// this slot's answer, and every later slot carries a SIR for each. At
	// most 4096 users per session, joined ones included.
	Join []*pb.LockstepUser
	// Leave lists users that leave after this slot (handed over, switched
	// off). Their index stays reserved; later answers repeat their last
	// power and target with command 0.
	Leave []int32
}

// LockstepSlotError is a slot message that the service refused in-stream
// (LockstepConfig.ReplyOnSlotError): no controller changed and the slot
// index did not advance; send slot Slot again, corrected.
type LockstepSlotError struct {
	// Slot is the slot index the service expects (the one to send again).
	Slot int64
	// Violations names each bad field of the message, e.g.
	// "slot.sir_db[3]" or "slot.join_users[0].inner_loop.step_db".
	Violations []FieldViolation
}

// Error lists the violations, one "field: rule" per line.
func (e *LockstepSlotError) Error() string {
	var b strings.Builder
	b.WriteString("Lockstep: slot message refused, send slot ")
	b.WriteString(strconv.FormatInt(e.Slot, 10))
	b.WriteString(" again:")
	for _, v := range e.Violations {
		b.WriteString("\n  ")
		b.WriteString(v.String())
	}
	return b.String()
}

// AsLockstepSlotError returns the LockstepSlotError in err's chain, if any.
func AsLockstepSlotError(err error) (*LockstepSlotError, bool) {
	var e *LockstepSlotError
	ok := errors.As(err, &e)
	return e, ok
}

// StepSlot sends the next slot (index NextSlot()) with everything the
// protocol carries: SIRs, block results, inactive users, joins and leaves;
// it returns the answer for that slot, whose user_state tells each user's
// state once any user has been inactive, joined or left.
//
// Errors: a *LockstepSlotError when the service refused the message
// in-stream (ReplyOnSlotError; the session is unchanged and usable);
// otherwise the stream has ended: an *InvalidInputError naming the fields
// for a bad message without ReplyOnSlotError, or the gRPC status.
func (s *LockstepSession) StepSlot(in LockstepSlotInput) (*pb.LockstepResponse, error) {
	resp, err := s.send(in)
	if err != nil {
		return nil, err
	}
	if se := resp.GetSlotError(); se != nil {
		e := &LockstepSlotError{Slot: resp.GetSlot()}
		for _, v := range se.GetViolations() {
			e.Violations = append(e.Violations, FieldViolation{Field: v.GetField(), Rule: v.GetDescription()})
		}
		return nil, e
	}
	return resp, nil
}

// send sends one slot message and receives its answer; an accepted slot
// advances NextSlot and adds joined users to Users.
func (s *LockstepSession) send(in LockstepSlotInput) (*pb.LockstepResponse, error) {
	if s.closed {
		return nil, errors.New("Lockstep: slot sent after Close")
	}
	s.slot.Slot = s.next
	s.slot.SirDb = in.SIRdB
	s.slot.Blocks = in.Blocks
	s.slot.InactiveUsers = in.Inactive
	s.slot.JoinUsers = in.Join
	s.slot.LeaveUsers = in.Leave
	err := s.stream.Send(&s.req)
	s.slot.SirDb, s.slot.Blocks, s.slot.InactiveUsers, s.slot.JoinUsers, s.slot.LeaveUsers = nil, nil, nil, nil, nil
	if err != nil {
		return nil, sendError(s.stream, err)
	}
	resp, err := s.stream.Recv()
	if err == io.EOF {
		return nil, errors.New("Lockstep: stream ended by the server")
	}
	if err != nil {
		return nil, wrapError(err)
	}
	if resp.GetSlotError() == nil { // a refused slot (reply_on_slot_error) is sent again
		s.next++
		s.users += len(in.Join)
	}
	return resp, nil
}

// Close ends the session: it half-closes the stream, waits for the server to
// finish it and returns the final status (nil for a clean end).
func (s *LockstepSession) Close() error {
	if s.closed {
		return nil
	}
	s.closed = true
	defer s.cancel()
	if err := s.stream.CloseSend(); err != nil {
		return wrapError(err)
	}
	for {
		_, err := s.stream.Recv()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return wrapError(err)
		}
	}
}

// sendError: a failed Send on a gRPC stream returns io.EOF; the real status
// comes from Recv.
func sendError(stream interface {
	Recv() (*pb.LockstepResponse, error)
}, err error) error {
	if err != io.EOF {
		return wrapError(err)
	}
	_, rerr := stream.Recv()
	if rerr == nil || rerr == io.EOF {
		return errors.New("Lockstep: stream closed by the server")
	}
	return wrapError(rerr)
}
