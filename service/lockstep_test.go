package service

import (
	"context"
	"errors"
	"io"
	"math"
	"testing"

	"google.golang.org/grpc/codes"

	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

func lockstepUser(stepDB float64, delay int32) *pb.LockstepUser {
	return &pb.LockstepUser{
		InnerLoop: &pb.InnerLoop{
			Mode: pb.InnerMode_INNER_MODE_CLOSED_LOOP, Command: pb.Command_COMMAND_FIXED_STEP,
			UpdateRateHz: 1500, StepDb: stepDB, FeedbackDelaySlots: delay,
			MinPowerDbm: -50, MaxPowerDbm: 24,
			InitialPower: pb.InitialPower_INITIAL_POWER_FIXED, InitialPowerDbm: 0,
		},
		OuterLoop: &pb.OuterLoop{Enabled: true, BlerTarget: 0.1, BlockSlots: 15, UpStepDb: 0.5,
			MinTargetDb: -10, MaxTargetDb: 30, InitialTargetDb: 5},
	}
}

func lockstepConfig(users int) *pb.LockstepRequest {
	cfg := &pb.LockstepConfig{Seed: 3}
	for range users {
		cfg.Users = append(cfg.Users, lockstepUser(1, 0))
	}
	return &pb.LockstepRequest{Message: &pb.LockstepRequest_Config{Config: cfg}}
}

func slotMsg(slot int64, sir ...float64) *pb.LockstepRequest {
	return &pb.LockstepRequest{Message: &pb.LockstepRequest_Slot{Slot: &pb.LockstepSlot{Slot: slot, SirDb: sir}}}
}

// TestLockstepMatchesController drives two users through a Lockstep
// stream and the engine's Controller directly: every reply must equal the
// Controller's decision bit for bit.
func TestLockstepMatchesController(t *testing.T) {
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{})
			st, err := env.loop.Lockstep(context.Background())
			if err != nil {
				t.Fatal(err)
			}
			cfgMsg := lockstepConfig(2)
			cfgMsg.GetConfig().Users[1] = lockstepUser(2, 1)
			cfgMsg.GetConfig().Receiver = &pb.Receiver{SirEstimationErrorDb: 1}
			if err := st.Send(cfgMsg); err != nil {
				t.Fatal(err)
			}
			var ctls []*loop.Controller
			for i, u := range cfgMsg.GetConfig().GetUsers() {
				sc := loop.Scenario{Receiver: loop.Receiver{SIREstimationErrorDB: 1},
					InnerLoop: innerLoopFromProto(u.GetInnerLoop()), OuterLoop: outerLoopFromProto(u.GetOuterLoop())}
				sc.Normalise()
				c, err := loop.NewController(sc.InnerLoop, sc.OuterLoop, sc.Receiver, 0, 3, i)
				if err != nil {
					t.Fatal(err)
				}
				ctls = append(ctls, c)
			}
			for slot := int64(0); slot < 60; slot++ {
				sir := []float64{5 + 3*math.Sin(float64(slot)/7), 4 - 2*math.Cos(float64(slot)/5)}
				req := slotMsg(slot, sir...)
				var blockErr *bool
				if slot%15 == 14 {
					e := slot%30 == 14
					blockErr = &e
					req.GetSlot().Blocks = []*pb.BlockResult{{User: 1, Error: e}}
				}
				if err := st.Send(req); err != nil {
					t.Fatal(err)
				}
				resp, err := st.Recv()
				if err != nil {
					t.Fatal(err)
				}
				if resp.GetSlot() != slot {
					t.Fatalf("reply for slot %d, want %d", resp.GetSlot(), slot)
				}
				for i, c := range ctls {
					var be *bool
					if i == 1 {
						be = blockErr
					}
					d := c.Step(sir[i], be)
					if resp.GetCommandDb()[i] != d.CommandDB || resp.GetTxPowerDbm()[i] != d.PowerDBm || resp.GetTargetDb()[i] != d.TargetDB {
						t.Fatalf("slot %d user %d: stream (%v, %v, %v), controller %+v", slot, i,
							resp.GetCommandDb()[i], resp.GetTxPowerDbm()[i], resp.GetTargetDb()[i], d)
					}
				}
			}
			if err := st.CloseSend(); err != nil {
				t.Fatal(err)
			}
			if _, err := st.Recv(); !errors.Is(err, io.EOF) {
				t.Fatalf("after CloseSend: %v, want EOF", err)
			}
		})
	}
}

// runLockstep sends msgs and returns the stream's final error.
func runLockstep(t *testing.T, env *testEnv, msgs ...*pb.LockstepRequest) error {
	t.Helper()
	st, err := env.loop.Lockstep(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	for _, m := range msgs {
		if err := st.Send(m); err != nil {
			break // the server ended the stream; Recv reports why
		}
	}
	_ = st.CloseSend()
	for {
		if _, err := st.Recv(); err != nil {
			if errors.Is(err, io.EOF) {
				return nil
			}
			return err
		}
	}
}

func TestLockstepMalformed(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	badStep := lockstepConfig(2)
	badStep.GetConfig().Users[1].InnerLoop.StepDb = 50
	unspecified := lockstepConfig(1)
	unspecified.GetConfig().Users[0].InnerLoop.Mode = 99 // not a defined value (0 now means the default)
	blocks := slotMsg(0, 1, 2)
	blocks.GetSlot().Blocks = []*pb.BlockResult{{User: 2}}
	dupBlocks := slotMsg(0, 1, 2)
	dupBlocks.GetSlot().Blocks = []*pb.BlockResult{{User: 1}, {User: 1, Error: true}}
	cases := []struct {
		name  string
		msgs  []*pb.LockstepRequest
		field string
	}{
		{"missing config", []*pb.LockstepRequest{slotMsg(0, 1, 2)}, "config"},
		{"empty stream", nil, "config"},
		{"config twice", []*pb.LockstepRequest{lockstepConfig(2), lockstepConfig(2)}, "config"},
		{"wrong user count", []*pb.LockstepRequest{lockstepConfig(2), slotMsg(0, 1, 2, 3)}, "slot.sir_db"},
		{"out-of-order slot", []*pb.LockstepRequest{lockstepConfig(2), slotMsg(0, 1, 2), slotMsg(2, 1, 2)}, "slot.slot"},
		{"repeated slot", []*pb.LockstepRequest{lockstepConfig(2), slotMsg(0, 1, 2), slotMsg(0, 1, 2)}, "slot.slot"},
		{"first slot not 0", []*pb.LockstepRequest{lockstepConfig(2), slotMsg(1, 1, 2)}, "slot.slot"},
		{"SIR not finite", []*pb.LockstepRequest{lockstepConfig(2), slotMsg(0, 1, math.NaN())}, "slot.sir_db[1]"},
		{"block of unknown user", []*pb.LockstepRequest{lockstepConfig(2), blocks}, "slot.blocks[0].user"},
		{"two blocks of one user", []*pb.LockstepRequest{lockstepConfig(2), dupBlocks}, "slot.blocks[1].user"},
		{"step out of range", []*pb.LockstepRequest{badStep}, "config.users[1].inner_loop.step_db"},
		{"mode undefined", []*pb.LockstepRequest{unspecified}, "config.users[0].inner_loop.mode"},
		{"no users", []*pb.LockstepRequest{{Message: &pb.LockstepRequest_Config{Config: &pb.LockstepConfig{}}}}, "config.users"},
		{"empty message", []*pb.LockstepRequest{{}}, "config"},
		{"inactive user unknown", []*pb.LockstepRequest{lockstepConfig(2), withSlot(slotMsg(0, 1, 2), func(m *pb.LockstepSlot) { m.InactiveUsers = []int32{2} })}, "slot.inactive_users[0]"},
		{"inactive user twice", []*pb.LockstepRequest{lockstepConfig(2), withSlot(slotMsg(0, 1, 2), func(m *pb.LockstepSlot) { m.InactiveUsers = []int32{1, 1} })}, "slot.inactive_users[1]"},
		{"block of inactive user", []*pb.LockstepRequest{lockstepConfig(2), withSlot(slotMsg(0, 1, 2), func(m *pb.LockstepSlot) {
			m.InactiveUsers = []int32{0}
			m.Blocks = []*pb.BlockResult{{User: 0}}
		})}, "slot.blocks[0].user"},
		{"leave twice", []*pb.LockstepRequest{lockstepConfig(2),
			withSlot(slotMsg(0, 1, 2), func(m *pb.LockstepSlot) { m.LeaveUsers = []int32{0} }),
			withSlot(slotMsg(1, 1, 2), func(m *pb.LockstepSlot) { m.LeaveUsers = []int32{0} })}, "slot.leave_users[0]"},
		{"block of a user that left", []*pb.LockstepRequest{lockstepConfig(2),
			withSlot(slotMsg(0, 1, 2), func(m *pb.LockstepSlot) { m.LeaveUsers = []int32{0} }),
			withSlot(slotMsg(1, 1, 2), func(m *pb.LockstepSlot) { m.Blocks = []*pb.BlockResult{{User: 0}} })}, "slot.blocks[0].user"},
		{"joining user's step out of range", []*pb.LockstepRequest{lockstepConfig(1), withSlot(slotMsg(0, 1), func(m *pb.LockstepSlot) {
			u := lockstepUser(50, 0)
			m.JoinUsers = []*pb.LockstepUser{lockstepUser(1, 0), u}
		})}, "slot.join_users[1].inner_loop.step_db"},
		{"joining user without inner loop", []*pb.LockstepRequest{lockstepConfig(1), withSlot(slotMsg(0, 1), func(m *pb.LockstepSlot) {
			m.JoinUsers = []*pb.LockstepUser{{OuterLoop: lockstepUser(1, 0).OuterLoop}}
		})}, "slot.join_users[0].inner_loop"},
		{"joined user's SIR missing", []*pb.LockstepRequest{lockstepConfig(1),
			withSlot(slotMsg(0, 1), func(m *pb.LockstepSlot) { m.JoinUsers = []*pb.LockstepUser{lockstepUser(1, 0)} }),
			slotMsg(1, 1)}, "slot.sir_db"},
		{"too many users after a join", []*pb.LockstepRequest{lockstepConfig(2), withSlot(slotMsg(0, 1, 2), func(m *pb.LockstepSlot) {
			for range maxLockstepUsers - 1 {
				m.JoinUsers = append(m.JoinUsers, lockstepUser(1, 0))
			}
		})}, "slot.join_users"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			wantInvalid(t, runLockstep(t, env, c.msgs...), c.field)
		})
	}
}

func TestLockstepStreamLimit(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{MaxLockstepStreams: 1})
	st, err := env.loop.Lockstep(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if err := st.Send(lockstepConfig(1)); err != nil {
		t.Fatal(err)
	}
	if err := st.Send(slotMsg(0, 3)); err != nil {
		t.Fatal(err)
	}
	if _, err := st.Recv(); err != nil { // the first stream is open and served
		t.Fatal(err)
	}
	wantCode(t, runLockstep(t, env, lockstepConfig(1)), codes.ResourceExhausted)
	_ = st.CloseSend()
	if _, err := st.Recv(); !errors.Is(err, io.EOF) {
		t.Fatal(err)
	}
}

// withSlot edits the slot of a slot message.
func withSlot(m *pb.LockstepRequest, edit func(*pb.LockstepSlot)) *pb.LockstepRequest {
	edit(m.GetSlot())
	return m
}

// lockstepPeer sends one message and returns the reply.
func lockstepStep(t *testing.T, st pb.LoopService_LockstepClient, m *pb.LockstepRequest) *pb.LockstepResponse {
	t.Helper()
	if err := st.Send(m); err != nil {
		t.Fatal(err)
	}
	r, err := st.Recv()
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// TestLockstepInactive checks an inactive slot against the definition of
// the feedback delay (a command decided in slot t changes the power of slot
// t+1+D, TS 25.214 §5.1.2.2 timing (memory)): with D = 1 and a fixed 1 dB
// step from 0 dBm, the up command of active slot 0 still arrives in slot 1
// although the user is inactive there; slot 2 (inactive) decides nothing,
// so the power holds at 1 dBm; the SIR value of an inactive user is ignored
// even when it is NaN.
func TestLockstepInactive(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	st, err := env.loop.Lockstep(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	cfg := &pb.LockstepConfig{Seed: 1, Users: []*pb.LockstepUser{lockstepUser(1, 1), lockstepUser(1, 1)}}
	if err := st.Send(&pb.LockstepRequest{Message: &pb.LockstepRequest_Config{Config: cfg}}); err != nil {
		t.Fatal(err)
	}
	const (
		active   = pb.LockstepUserState_LOCKSTEP_USER_STATE_ACTIVE
		inactive = pb.LockstepUserState_LOCKSTEP_USER_STATE_INACTIVE
	)
	inact0 := func(m *pb.LockstepSlot) { m.InactiveUsers = []int32{0} }
	steps := []struct {
		msg    *pb.LockstepRequest
		cmd    float64 // user 0
		powDBm float64 // user 0, next slot
		states []pb.LockstepUserState
	}{
		// SIR 0 dB against the 5 dB target: up.
		{slotMsg(0, 0, 0), 1, 0, nil},
		{withSlot(slotMsg(1, math.NaN(), 0), inact0), 0, 1, []pb.LockstepUserState{inactive, active}},
		{withSlot(slotMsg(2, math.Inf(1), 0), inact0), 0, 1, []pb.LockstepUserState{inactive, active}},
		// Active again, SIR above target: down, arriving one slot later.
		{slotMsg(3, 10, 0), -1, 1, []pb.LockstepUserState{active, active}},
		{slotMsg(4, 10, 0), -1, 0, []pb.LockstepUserState{active, active}},
	}
	for i, s := range steps {
		r := lockstepStep(t, st, s.msg)
		if r.GetCommandDb()[0] != s.cmd || math.Abs(r.GetTxPowerDbm()[0]-s.powDBm) > 1e-12 || r.GetTargetDb()[0] != 5 {
			t.Errorf("slot %d: user 0 command %v power %v target %v, want %v %v 5", i, r.GetCommandDb()[0], r.GetTxPowerDbm()[0], r.GetTargetDb()[0], s.cmd, s.powDBm)
		}
		if len(r.GetUserState()) != len(s.states) {
			t.Fatalf("slot %d: user_state %v, want %v", i, r.GetUserState(), s.states)
		}
		for u := range s.states {
			if r.GetUserState()[u] != s.states[u] {
				t.Errorf("slot %d: user_state %v, want %v", i, r.GetUserState(), s.states)
			}
		}
		// User 1 (always active, SIR 0 dB): up every slot, D = 1.
		if want := float64(max(i, 0)); math.Abs(r.GetTxPowerDbm()[1]-want) > 1e-12 {
			t.Errorf("slot %d: user 1 power %v, want %v", i, r.GetTxPowerDbm()[1], want)
		}
	}
	_ = st.CloseSend()
}

// TestLockstepJoinLeave: a user joining after slot 1 gets the next index,
// its first power (the fixed initial power) in that slot's reply, and from
// then on exactly the decisions of a Controller of that user index; a user
// leaving after slot 3 keeps its last power and target, command 0, and
// its SIR entry is ignored.
func TestLockstepJoinLeave(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	st, err := env.loop.Lockstep(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if err := st.Send(lockstepConfig(1)); err != nil {
		t.Fatal(err)
	}
	joiner := lockstepUser(2, 1)
	joiner.InnerLoop.InitialPowerDbm = 7
	sc := loop.Scenario{InnerLoop: innerLoopFromProto(joiner.GetInnerLoop()), OuterLoop: outerLoopFromProto(joiner.GetOuterLoop())}
	sc.Normalise()
	ref, err := loop.NewController(sc.InnerLoop, sc.OuterLoop, sc.Receiver, 0, 3, 1)
	if err != nil {
		t.Fatal(err)
	}
	const (
		active = pb.LockstepUserState_LOCKSTEP_USER_STATE_ACTIVE
		joined = pb.LockstepUserState_LOCKSTEP_USER_STATE_JOINED
		left   = pb.LockstepUserState_LOCKSTEP_USER_STATE_LEFT
	)
	lockstepStep(t, st, slotMsg(0, 3))
	r := lockstepStep(t, st, withSlot(slotMsg(1, 3), func(m *pb.LockstepSlot) { m.JoinUsers = []*pb.LockstepUser{joiner} }))
	if len(r.GetTxPowerDbm()) != 2 || math.Abs(r.GetTxPowerDbm()[1]-7) > 1e-9 || r.GetCommandDb()[1] != 0 || r.GetTargetDb()[1] != 5 {
		t.Fatalf("join reply %v", r)
	}
	if got := r.GetUserState(); len(got) != 2 || got[0] != active || got[1] != joined {
		t.Fatalf("join reply user_state %v", got)
	}
	var last0 [2]float64
	for slot := int64(2); slot < 40; slot++ {
		sir := 4 + 3*math.Sin(float64(slot))
		s0 := 2.0
		if slot > 3 {
			s0 = math.NaN() // user 0 has left: ignored
		}
		m := slotMsg(slot, s0, sir)
		if slot == 3 {
			m.GetSlot().LeaveUsers = []int32{0}
		}
		var be *bool
		if slot%15 == 0 {
			e := slot == 30
			be = &e
			m.GetSlot().Blocks = []*pb.BlockResult{{User: 1, Error: e}}
		}
		r := lockstepStep(t, st, m)
		d := ref.Step(sir, be)
		if r.GetCommandDb()[1] != d.CommandDB || r.GetTxPowerDbm()[1] != d.PowerDBm || r.GetTargetDb()[1] != d.TargetDB {
			t.Fatalf("slot %d: joined user (%v %v %v), controller %+v", slot, r.GetCommandDb()[1], r.GetTxPowerDbm()[1], r.GetTargetDb()[1], d)
		}
		switch {
		case slot == 3:
			last0 = [2]float64{r.GetTxPowerDbm()[0], r.GetTargetDb()[0]}
		case slot > 3:
			if r.GetCommandDb()[0] != 0 || r.GetTxPowerDbm()[0] != last0[0] || r.GetTargetDb()[0] != last0[1] {
				t.Fatalf("slot %d: user 0 left but reply (%v %v %v), want (0 %v %v)", slot, r.GetCommandDb()[0], r.GetTxPowerDbm()[0], r.GetTargetDb()[0], last0[0], last0[1])
			}
		}
		if slot >= 3 && (r.GetUserState()[0] != left || r.GetUserState()[1] != active) {
			t.Fatalf("slot %d: user_state %v", slot, r.GetUserState())
		}
	}
	_ = st.CloseSend()
}

// TestLockstepSlotErrorReply: with reply_on_slot_error each bad slot
// message is answered in the stream with slot_error naming the field, no
// state changes, and the stream then runs exactly as one that never saw
// the bad messages (compared with a Controller reply by reply).
func TestLockstepSlotErrorReply(t *testing.T) {
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{})
			st, err := env.loop.Lockstep(context.Background())
			if err != nil {
				t.Fatal(err)
			}
			cfg := lockstepConfig(2)
			cfg.GetConfig().ReplyOnSlotError = true
			cfg.GetConfig().Receiver = &pb.Receiver{SirEstimationErrorDb: 1, SirAveragingSlots: 3}
			if err := st.Send(cfg); err != nil {
				t.Fatal(err)
			}
			var ctls []*loop.Controller
			for i, u := range cfg.GetConfig().GetUsers() {
				sc := loop.Scenario{Receiver: loop.Receiver{SIREstimationErrorDB: 1, SIRAveragingSlots: 3},
					InnerLoop: innerLoopFromProto(u.GetInnerLoop()), OuterLoop: outerLoopFromProto(u.GetOuterLoop())}
				sc.Normalise()
				c, err := loop.NewController(sc.InnerLoop, sc.OuterLoop, sc.Receiver, 0, 3, i)
				if err != nil {
					t.Fatal(err)
				}
				ctls = append(ctls, c)
			}
			bad := []struct {
				name  string
				edit  func(m *pb.LockstepSlot)
				field string
			}{
				{"SIR NaN", func(m *pb.LockstepSlot) { m.SirDb[1] = math.NaN() }, "slot.sir_db[1]"},
				{"SIR too high", func(m *pb.LockstepSlot) { m.SirDb[0] = 101 }, "slot.sir_db[0]"},
				{"user count", func(m *pb.LockstepSlot) { m.SirDb = append(m.SirDb, 1) }, "slot.sir_db"},
				{"slot ahead", func(m *pb.LockstepSlot) { m.Slot++ }, "slot.slot"},
				{"block twice", func(m *pb.LockstepSlot) { m.Blocks = []*pb.BlockResult{{User: 0}, {User: 0, Error: true}} }, "slot.blocks[1].user"},
				{"block of unknown user", func(m *pb.LockstepSlot) { m.Blocks = []*pb.BlockResult{{User: 0, Error: true}, {User: 9}} }, "slot.blocks[1].user"},
				{"leave unknown", func(m *pb.LockstepSlot) { m.LeaveUsers = []int32{-1} }, "slot.leave_users[0]"},
				{"bad joiner", func(m *pb.LockstepSlot) { m.JoinUsers = []*pb.LockstepUser{lockstepUser(50, 0)} }, "slot.join_users[0].inner_loop.step_db"},
			}
			for slot := int64(0); slot < 45; slot++ {
				sir := []float64{5 + 3*math.Sin(float64(slot)/7), 4 - 2*math.Cos(float64(slot)/5)}
				good := func() *pb.LockstepRequest {
					m := slotMsg(slot, append([]float64(nil), sir...)...)
					if slot%15 == 14 {
						m.GetSlot().Blocks = []*pb.BlockResult{{User: 0, Error: slot == 14}}
					}
					return m
				}
				if slot%5 == 2 { // a bad message first, then the good one
					b := bad[int(slot/5)%len(bad)]
					r := lockstepStep(t, st, withSlot(good(), b.edit))
					se := r.GetSlotError()
					if se == nil || len(r.GetTxPowerDbm()) != 0 {
						t.Fatalf("%s: reply %v, want slot_error only", b.name, r)
					}
					found := false
					for _, v := range se.GetViolations() {
						found = found || v.GetField() == b.field
					}
					if b.name == "SIR NaN" && se.GetViolations()[0].GetDescription() != "must be finite and in [-100, 100] dB, got NaN" {
						t.Errorf("%s: description %q", b.name, se.GetViolations()[0].GetDescription())
					}
					if !found || r.GetSlot() != slot {
						t.Fatalf("%s: slot_error %v (slot %d) does not name %q or the slot expected (%d)", b.name, se, r.GetSlot(), b.field, slot)
					}
				}
				r := lockstepStep(t, st, good())
				if r.GetSlotError() != nil || r.GetSlot() != slot {
					t.Fatalf("slot %d: reply %v", slot, r)
				}
				for i, c := range ctls {
					var be *bool
					if i == 0 && slot%15 == 14 {
						e := slot == 14
						be = &e
					}
					d := c.Step(sir[i], be)
					if r.GetCommandDb()[i] != d.CommandDB || r.GetTxPowerDbm()[i] != d.PowerDBm || r.GetTargetDb()[i] != d.TargetDB {
						t.Fatalf("slot %d user %d: stream (%v %v %v), controller %+v", slot, i, r.GetCommandDb()[i], r.GetTxPowerDbm()[i], r.GetTargetDb()[i], d)
					}
				}
			}
			if err := st.CloseSend(); err != nil {
				t.Fatal(err)
			}
			if _, err := st.Recv(); !errors.Is(err, io.EOF) {
				t.Fatalf("after CloseSend: %v, want EOF", err)
			}
		})
	}
}
