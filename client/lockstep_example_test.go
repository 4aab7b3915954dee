package client_test

import (
	"context"
	"fmt"
	"io"
	"log/slog"

	"github.com/fadeloop/fadeloop/client"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"github.com/fadeloop/fadeloop/service"
)

// Driving two users slot by slot: user 1 is silent in slot 1, a third user
// joins after slot 1, user 0 leaves after slot 2, and a bad slot message
// is refused without losing the session.
func ExampleLockstepSession_StepSlot() {
	c, err := client.Embedded(service.Config{Logger: slog.New(slog.NewTextHandler(io.Discard, nil))}, client.Options{})
	if err != nil {
		panic(err)
	}
	defer c.Close()
	user := &pb.LockstepUser{
		InnerLoop: &pb.InnerLoop{Mode: pb.InnerMode_INNER_MODE_CLOSED_LOOP, Command: pb.Command_COMMAND_FIXED_STEP,
			UpdateRateHz: 1500, StepDb: 1, FeedbackDelaySlots: 0, MinPowerDbm: -50, MaxPowerDbm: 24,
			InitialPower: pb.InitialPower_INITIAL_POWER_FIXED, InitialPowerDbm: 0},
		OuterLoop: &pb.OuterLoop{Enabled: true, BlerTarget: 0.1, UpStepDb: 0.5, MinTargetDb: -10, MaxTargetDb: 30, InitialTargetDb: 5},
	}
	s, err := c.Lockstep(context.Background(), &pb.LockstepConfig{
		Seed: 1, ReplyOnSlotError: true, Users: []*pb.LockstepUser{user, user}})
	if err != nil {
		panic(err)
	}
	defer s.Close()
	show := func(r *pb.LockstepResponse) {
		fmt.Printf("slot %d: power %.1f dBm, target %.1f dB, state %v\n", r.GetSlot(), r.GetTxPowerDbm(), r.GetTargetDb(), r.GetUserState())
	}
	r, _ := s.StepSlot(client.LockstepSlotInput{SIRdB: []float64{2, 8}})
	show(r)
	r, _ = s.StepSlot(client.LockstepSlotInput{SIRdB: []float64{2, 0}, Inactive: []int32{1}, Join: []*pb.LockstepUser{user}})
	show(r)
	_, err = s.StepSlot(client.LockstepSlotInput{SIRdB: []float64{2, 8}}) // 2 SIRs for 3 users
	if e, ok := client.AsLockstepSlotError(err); ok {
		fmt.Printf("refused: %s; send slot %d again\n", e.Violations[0].Field, e.Slot)
	}
	r, _ = s.StepSlot(client.LockstepSlotInput{SIRdB: []float64{2, 8, 1}, Leave: []int32{0},
		Blocks: []*pb.BlockResult{{User: 1, Error: true}}})
	show(r)
	fmt.Println("users", s.Users())
	// Output:
	// slot 0: power [1.0 -1.0] dBm, target [5.0 5.0] dB, state []
	// slot 1: power [2.0 -1.0 0.0] dBm, target [5.0 5.0 5.0] dB, state [LOCKSTEP_USER_STATE_ACTIVE LOCKSTEP_USER_STATE_INACTIVE LOCKSTEP_USER_STATE_JOINED]
	// refused: slot.sir_db; send slot 2 again
	// slot 2: power [3.0 -2.0 1.0] dBm, target [5.0 5.5 5.0] dB, state [LOCKSTEP_USER_STATE_LEFT LOCKSTEP_USER_STATE_ACTIVE LOCKSTEP_USER_STATE_ACTIVE]
	// users 3
}
