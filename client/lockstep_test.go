package client

import (
	"math"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// stepSlotUser is a 1 dB fixed-step user with one slot of feedback delay
// and the jump-rule outer loop (up step 0.5 dB).
func stepSlotUser() *pb.LockstepUser {
	return &pb.LockstepUser{
		InnerLoop: &pb.InnerLoop{
			Mode: pb.InnerMode_INNER_MODE_CLOSED_LOOP, Command: pb.Command_COMMAND_FIXED_STEP,
			UpdateRateHz: 1500, StepDb: 1, FeedbackDelaySlots: 1, MinPowerDbm: -50, MaxPowerDbm: 24,
			InitialPower: pb.InitialPower_INITIAL_POWER_FIXED, InitialPowerDbm: 0,
		},
		OuterLoop: &pb.OuterLoop{Enabled: true, BlerTarget: 0.1, BlockSlots: 15, UpStepDb: 0.5,
			MinTargetDb: -10, MaxTargetDb: 30, InitialTargetDb: 5},
	}
}

// TestLockstepStepSlot drives two sessions with the same configuration
// (over the in-process bufconn transport) through inactive users, a join,
// a leave and block results. Session a also gets a bad message before
// several slots: each comes back as a *LockstepSlotError naming the field,
// and afterwards a's answers still equal b's bit for bit (no state lost).
func TestLockstepStepSlot(t *testing.T) {
	c := embedded(t)
	cfg := &pb.LockstepConfig{Seed: 5, ReplyOnSlotError: true, Users: []*pb.LockstepUser{stepSlotUser(), stepSlotUser()}}
	a, err := c.Lockstep(ctxT(t), cfg)
	if err != nil {
		t.Fatal(err)
	}
	b, err := c.Lockstep(ctxT(t), cfg)
	if err != nil {
		t.Fatal(err)
	}
	badJoin := stepSlotUser()
	badJoin.InnerLoop.StepDb = -1
	const (
		active   = pb.LockstepUserState_LOCKSTEP_USER_STATE_ACTIVE
		inactive = pb.LockstepUserState_LOCKSTEP_USER_STATE_INACTIVE
		joined   = pb.LockstepUserState_LOCKSTEP_USER_STATE_JOINED
		left     = pb.LockstepUserState_LOCKSTEP_USER_STATE_LEFT
	)
	steps := []struct {
		in        LockstepSlotInput
		bad       *LockstepSlotInput // sent to a first, refused
		badField  string             // field named first (prefix)
		users     int                // Users() after the slot
		state     []pb.LockstepUserState
		checkResp func(t *testing.T, r, prev *pb.LockstepResponse)
	}{
		{in: LockstepSlotInput{SIRdB: []float64{-10, 20}}, users: 2},
		{in: LockstepSlotInput{SIRdB: []float64{-10, 20}, Inactive: []int32{1}},
			bad: &LockstepSlotInput{SIRdB: []float64{math.NaN(), 20}}, badField: "slot.sir_db[0]",
			users: 2, state: []pb.LockstepUserState{active, inactive},
			checkResp: func(t *testing.T, r, prev *pb.LockstepResponse) {
				if r.GetCommandDb()[1] != 0 || r.GetTargetDb()[1] != prev.GetTargetDb()[1] {
					t.Errorf("inactive user: command %g, target %g (was %g); want 0 and held", r.GetCommandDb()[1], r.GetTargetDb()[1], prev.GetTargetDb()[1])
				}
			}},
		{in: LockstepSlotInput{SIRdB: []float64{-10, 20}, Join: []*pb.LockstepUser{stepSlotUser()}},
			bad: &LockstepSlotInput{SIRdB: []float64{-10, 20}, Inactive: []int32{7}}, badField: "slot.inactive_users[0]",
			users: 3, state: []pb.LockstepUserState{active, active, joined},
			checkResp: func(t *testing.T, r, _ *pb.LockstepResponse) {
				if len(r.GetTxPowerDbm()) != 3 || r.GetTxPowerDbm()[2] != 0 || r.GetTargetDb()[2] != 5 {
					t.Errorf("joined user: powers %v, targets %v; want its initial 0 dBm and 5 dB third", r.GetTxPowerDbm(), r.GetTargetDb())
				}
			}},
		{in: LockstepSlotInput{SIRdB: []float64{-10, 20, -10}},
			bad: &LockstepSlotInput{SIRdB: []float64{-10, 20}}, badField: "slot.sir_db",
			users: 3, state: []pb.LockstepUserState{active, active, active},
			checkResp: func(t *testing.T, r, _ *pb.LockstepResponse) {
				if r.GetCommandDb()[2] != 1 {
					t.Errorf("joined user far below target: command %g, want +1", r.GetCommandDb()[2])
				}
			}},
		{in: LockstepSlotInput{SIRdB: []float64{-10, 20, -10}, Leave: []int32{0}},
			bad: &LockstepSlotInput{SIRdB: []float64{-10, 20, -10}, Join: []*pb.LockstepUser{badJoin}}, badField: "slot.join_users[0].",
			users: 3, state: []pb.LockstepUserState{left, active, active}},
		{in: LockstepSlotInput{SIRdB: []float64{0, 20, -10}, Blocks: []*pb.BlockResult{{User: 1, Error: true}}},
			bad: &LockstepSlotInput{SIRdB: []float64{0, 20, -10}, Blocks: []*pb.BlockResult{{User: 0, Error: true}}}, badField: "slot.blocks[0].user",
			users: 3, state: []pb.LockstepUserState{left, active, active},
			checkResp: func(t *testing.T, r, prev *pb.LockstepResponse) {
				if r.GetCommandDb()[0] != 0 {
					t.Errorf("user that left: command %g, want 0", r.GetCommandDb()[0])
				}
				if got, want := r.GetTargetDb()[1], prev.GetTargetDb()[1]+0.5; got != want {
					t.Errorf("block error: target %g, want %g (+0.5 dB up step)", got, want)
				}
			}},
		{in: LockstepSlotInput{SIRdB: []float64{0, 20, -10}}, users: 3, state: []pb.LockstepUserState{left, active, active},
			checkResp: func(t *testing.T, r, prev *pb.LockstepResponse) {
				if r.GetTxPowerDbm()[0] != prev.GetTxPowerDbm()[0] || r.GetTargetDb()[0] != prev.GetTargetDb()[0] {
					t.Errorf("user that left: power %g, target %g; want the last ones repeated (%g, %g)",
						r.GetTxPowerDbm()[0], r.GetTargetDb()[0], prev.GetTxPowerDbm()[0], prev.GetTargetDb()[0])
				}
			}},
	}
	var prev *pb.LockstepResponse
	for i, st := range steps {
		if st.bad != nil {
			next, users := a.NextSlot(), a.Users()
			_, err := a.StepSlot(*st.bad)
			se, ok := AsLockstepSlotError(err)
			if !ok {
				t.Fatalf("slot %d, bad message: error %v, want a *LockstepSlotError", i, err)
			}
			if se.Slot != next || len(se.Violations) == 0 || !strings.HasPrefix(se.Violations[0].Field, st.badField) {
				t.Errorf("slot %d, bad message: %v; want slot %d again and field %s first", i, se, next, st.badField)
			}
			if a.NextSlot() != next || a.Users() != users {
				t.Errorf("slot %d, after a refused message: next slot %d, users %d; want %d, %d unchanged", i, a.NextSlot(), a.Users(), next, users)
			}
		}
		ra, err := a.StepSlot(st.in)
		if err != nil {
			t.Fatalf("slot %d: %v", i, err)
		}
		rb, err := b.StepSlot(st.in)
		if err != nil {
			t.Fatalf("slot %d (reference session): %v", i, err)
		}
		if !proto.Equal(ra, rb) {
			t.Errorf("slot %d: answer after refused messages %v differs from the reference %v", i, ra, rb)
		}
		if ra.GetSlot() != int64(i) || a.NextSlot() != int64(i+1) || a.Users() != st.users || len(ra.GetTxPowerDbm()) != st.users {
			t.Errorf("slot %d: answer for slot %d with %d powers, next slot %d, users %d; want %d users", i, ra.GetSlot(), len(ra.GetTxPowerDbm()), a.NextSlot(), a.Users(), st.users)
		}
		if st.state != nil && !equalStates(ra.GetUserState(), st.state) {
			t.Errorf("slot %d: user states %v, want %v", i, ra.GetUserState(), st.state)
		}
		if st.checkResp != nil {
			st.checkResp(t, ra, prev)
		}
		prev = ra
	}
	for _, s := range []*LockstepSession{a, b} {
		if err := s.Close(); err != nil {
			t.Errorf("Close: %v", err)
		}
	}
	if _, err := a.StepSlot(LockstepSlotInput{SIRdB: []float64{0, 0, 0}}); err == nil {
		t.Error("StepSlot after Close succeeded")
	}
}

func equalStates(a, b []pb.LockstepUserState) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// TestLockstepStepSlotEndsStream: without ReplyOnSlotError a bad slot
// message ends the stream with an *InvalidInputError naming the field.
func TestLockstepStepSlotEndsStream(t *testing.T) {
	c := embedded(t)
	s, err := c.Lockstep(ctxT(t), &pb.LockstepConfig{Seed: 1, Users: []*pb.LockstepUser{stepSlotUser()}})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	_, err = s.StepSlot(LockstepSlotInput{SIRdB: []float64{0}, Leave: []int32{3}})
	e, ok := AsInvalidInput(err)
	if !ok || len(e.Violations) == 0 || e.Violations[0].Field != "slot.leave_users[0]" {
		t.Fatalf("bad leave index: %v, want an InvalidInputError naming slot.leave_users[0]", err)
	}
	if _, err := s.StepSlot(LockstepSlotInput{SIRdB: []float64{0}}); err == nil {
		t.Error("the stream went on after INVALID_ARGUMENT")
	}
}
