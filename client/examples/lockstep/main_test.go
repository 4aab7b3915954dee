package main

import (
	"context"
	"io"
	"log/slog"
	"strings"
	"testing"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/service"
)

// TestExampleConverges runs the example network against an in-process
// service and checks that fadeloop controls it: the users' measured SIR
// tracks their targets, and the outer loop holds the block error ratio at
// its 0.1 target (the jump algorithm's fixed point, Sampath, Kumar &
// Holtzman, IEEE VTC 1997). Over the second half of 3000 slots about 1100
// blocks are judged: the binomial standard deviation of the BLER is
// sqrt(0.1·0.9/1100) ≈ 0.009, so [0.06, 0.14] is more than 4 σ each side.
// The SIR error bound: the 1 dB step's limit cycle (about ±1 dB with one
// slot of feedback delay) plus the 1 dB estimation error the service adds
// give a mean |error| near 1 dB (the run shows 0.98); 1.5 dB fails a
// loop that does not follow its target (several dB off).
func TestExampleConverges(t *testing.T) {
	c, err := client.Embedded(service.Config{Logger: slog.New(slog.NewTextHandler(io.Discard, nil))}, client.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	sum, err := Run(context.Background(), c, Params{Slots: 3000, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	sum.Print(&b)
	t.Log("\n" + b.String())
	if sum.SIRErrorDB > 1.5 {
		t.Errorf("mean |SIR - target| %.2f dB, want <= 1.5", sum.SIRErrorDB)
	}
	if sum.BLER < 0.06 || sum.BLER > 0.14 || sum.Blocks < 1000 {
		t.Errorf("BLER %.3f over %d blocks, want 0.1 ± 0.04 over >= 1000", sum.BLER, sum.Blocks)
	}
	if sum.Users != 13 {
		t.Errorf("%d user indices, want 13 (12 + 1 joined)", sum.Users)
	}
	if sum.LeftUser != 0 || sum.JoinedUser != 12 || sum.ChangeSlot != 1000 {
		t.Errorf("user %d left, user %d joined after slot %d; want 0, 12 after slot 1000", sum.LeftUser, sum.JoinedUser, sum.ChangeSlot)
	}
	if sum.SlotErrors != 1 || sum.LastViolation != "slot.sir_db[0]" {
		t.Errorf("refused slots %d (%q), want 1 naming slot.sir_db[0]", sum.SlotErrors, sum.LastViolation)
	}
}
