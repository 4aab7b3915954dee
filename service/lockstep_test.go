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
