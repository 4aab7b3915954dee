// Command lockstep is an end-to-end example of driving fadeloop's
// power-control controllers from an external system simulator over the
// Lockstep RPC, with the client package's LockstepSession.StepSlot: a few
// cells on a line, users moving along it and going silent (inactive), one
// call ending (leave) and another starting (join), the simulator's own
// path loss and link model, fadeloop deciding every user's power slot by
// slot.
//
// The simulator owns the radio world: positions, path loss (the macro-cell
// model of 3GPP TR 25.942 §4.1.1, L = 128.1 + 37.6·log10(d/km) dB), the
// interference sum, and block CRC outcomes drawn from its own link curve.
// fadeloop owns the control: each reply's tx_power_dbm is the power the
// user transmits in the next slot.
//
// Usage:
//
//	go run ./client/examples/lockstep                      # in-process service
//	go run ./client/examples/lockstep -server 127.0.0.1:50051
//
// Simulated settings do not replace the operator's radio planning, the
// regulatory limits on transmit power and exposure, or licensed practice
// (loop.Caution, printed at the end).
package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"math"
	"math/rand/v2"
	"os"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"github.com/fadeloop/fadeloop/service"
)

func main() {
	server := flag.String("server", "", "fadeloopd address (default: an in-process service)")
	slots := flag.Int("slots", 4500, "slots to simulate (1500 per second)")
	flag.Parse()
	var c *client.Client
	var err error
	if *server == "" {
		c, err = client.Embedded(service.Config{Logger: slog.New(slog.NewTextHandler(io.Discard, nil))}, client.Options{})
	} else {
		c, err = client.Dial(*server, client.Options{})
	}
	if err != nil {
		fmt.Fprintln(os.Stderr, "lockstep:", err)
		os.Exit(1)
	}
	defer c.Close()
	sum, err := Run(context.Background(), c, Params{Slots: *slots, Seed: 1})
	if err != nil {
		fmt.Fprintln(os.Stderr, "lockstep:", err)
		os.Exit(1)
	}
	sum.Print(os.Stdout)
}

// Params of the example network (invented demo values).
type Params struct {
	Slots int    // slots to simulate, at 1500 slots/s
	Seed  uint64 // seed of the simulator's own draws and of the controllers
}

// Network constants of the demo.
const (
	slotRateHz     = 1500
	processingGain = 3.84e6 / 12.2e3 // chip rate / bit rate (12.2 kbit/s speech bearer)
	noiseDBm       = -103.0          // thermal noise in 3.84 MHz with a 5 dB noise figure (common practice)
	blockSlots     = 15              // one block per 10 ms frame
	dtxProb        = 0.05            // chance a user is silent in a given slot
)

var cellsX = []float64{0, 1000, 2000} // cell positions on the line, m

// pathLossDB is the simulator's own path loss, 3GPP TR 25.942 §4.1.1 macro
// model (memory), at a distance d m (30 m minimum: antenna height).
func pathLossDB(d float64) float64 {
	d = math.Hypot(d, 30)
	return 128.1 + 37.6*math.Log10(d/1000)
}

// blockErrorProb is the simulator's link curve (invented for the demo): a
// logistic BLER over the block's mean SIR in dB, 50 % at 4 dB.
func blockErrorProb(sirDB float64) float64 { return 1 / (1 + math.Exp(2*(sirDB-4))) }

type user struct {
	x, v   float64 // position m, speed m/s
	powDBm float64 // power of the current slot
	active bool    // transmits in this slot
	gone   bool
	blkSum float64 // linear SIR sum over the current block
	blkN   int
}

// Summary is what the example reports.
type Summary struct {
	Users         int     // user indices used (joined ones included)
	Slots         int     // slots simulated
	SIRErrorDB    float64 // mean |measured SIR − target| of active users over the second half, dB
	Blocks        int     // blocks judged over the second half
	BLER          float64 // block error ratio over the second half
	MeanTargetDB  float64 // mean SIR target at the end, dB
	SlotErrors    int     // slot messages the service refused in-stream
	LastViolation string  // the field it named
	ChangeSlot    int64   // slot after which one user left and one joined
	LeftUser      int     // index of the user that left
	JoinedUser    int     // index the joining user took
	JoinPowerDBm  float64 // its first transmit power, from the reply to ChangeSlot
}

// Print writes the summary.
func (s Summary) Print(w io.Writer) {
	fmt.Fprintf(w, "users            %d\n", s.Users)
	fmt.Fprintf(w, "slots            %d\n", s.Slots)
	fmt.Fprintf(w, "SIR error        %.2f dB (mean |SIR - target|, second half)\n", s.SIRErrorDB)
	fmt.Fprintf(w, "BLER             %.3f over %d blocks (target 0.1)\n", s.BLER, s.Blocks)
	fmt.Fprintf(w, "mean target      %.2f dB\n", s.MeanTargetDB)
	fmt.Fprintf(w, "left, joined     user %d left and user %d joined after slot %d (first power %.1f dBm)\n",
		s.LeftUser, s.JoinedUser, s.ChangeSlot, s.JoinPowerDBm)
	fmt.Fprintf(w, "refused slots    %d (%s)\n", s.SlotErrors, s.LastViolation)
	fmt.Fprintln(w, loop.Caution)
}

func newUser(rng *rand.Rand) *user {
	return &user{x: 100 + 1800*rng.Float64(), v: (rng.Float64()*2 - 1) * 30}
}

func userSettings() *pb.LockstepUser {
	return &pb.LockstepUser{
		InnerLoop: &pb.InnerLoop{
			Mode: pb.InnerMode_INNER_MODE_CLOSED_LOOP, Command: pb.Command_COMMAND_FIXED_STEP,
			UpdateRateHz: slotRateHz, StepDb: 1, FeedbackDelaySlots: 1,
			MinPowerDbm: -50, MaxPowerDbm: 24,
			InitialPower: pb.InitialPower_INITIAL_POWER_FIXED, InitialPowerDbm: 0,
		},
		OuterLoop: &pb.OuterLoop{Enabled: true, BlerTarget: 0.1, BlockSlots: blockSlots, UpStepDb: 0.5,
			MinTargetDb: -5, MaxTargetDb: 15, InitialTargetDb: 6},
	}
}

// Run simulates p.Slots slots with fadeloop as the power controller,
// through the client package's LockstepSession. Twelve users start; user 0
// leaves and a new user joins at a third of the run; once, a slot with a
// non-finite SIR is sent on purpose and refused in-stream, then resent.
func Run(ctx context.Context, c *client.Client, p Params) (Summary, error) {
	rng := rand.New(rand.NewPCG(p.Seed, 7))
	cfg := &pb.LockstepConfig{Seed: p.Seed, ReplyOnSlotError: true,
		Receiver: &pb.Receiver{SirEstimationErrorDb: 1}} // the service adds a 1 dB estimation error
	var users []*user
	for range 12 {
		users = append(users, newUser(rng))
		cfg.Users = append(cfg.Users, userSettings())
	}
	sess, err := c.Lockstep(ctx, cfg)
	if err != nil {
		return Summary{}, err
	}
	defer sess.Close()
	var sum Summary
	var errAbs float64
	var nErr, blocks, blockErrs int
	sir := make([]float64, 0, 16)
	var target []float64
	dt := 1.0 / slotRateHz
	for slot := 0; slot < p.Slots; slot++ {
		// Move; pick who is silent (DTX) this slot.
		var in client.LockstepSlotInput
		for i, u := range users {
			u.x += u.v * dt
			if u.x < 50 || u.x > 1950 {
				u.v = -u.v
			}
			u.active = !u.gone && rng.Float64() >= dtxProb
			if !u.active && !u.gone {
				in.Inactive = append(in.Inactive, int32(i))
			}
		}
		// The simulator's radio: SIR of each active user at its best cell.
		sir = sir[:0]
		for _, u := range users {
			if !u.active {
				sir = append(sir, 0) // ignored by the service
				continue
			}
			best := bestCell(u.x)
			var interf float64
			for _, o := range users {
				if o != u && o.active {
					interf += dbmToMW(o.powDBm - pathLossDB(o.x-cellsX[best]))
				}
			}
			s := processingGain * dbmToMW(u.powDBm-pathLossDB(u.x-cellsX[best])) / (dbmToMW(noiseDBm) + interf)
			sir = append(sir, math.Max(-100, math.Min(100, 10*math.Log10(s))))
		}
		in.SIRdB = sir
		// Blocks: the CRC outcome from the block's mean SIR, every 15 slots.
		for i, u := range users {
			if !u.active {
				continue
			}
			u.blkSum += math.Pow(10, sir[i]/10)
			u.blkN++
			if slot%blockSlots == blockSlots-1 {
				e := rng.Float64() < blockErrorProb(10*math.Log10(u.blkSum/float64(u.blkN)))
				in.Blocks = append(in.Blocks, &pb.BlockResult{User: int32(i), Error: e})
				u.blkSum, u.blkN = 0, 0
				if slot >= p.Slots/2 {
					blocks++
					if e {
						blockErrs++
					}
				}
			}
		}
		changing := slot == p.Slots/3
		if changing { // a call ends and another starts
			in.Leave = []int32{0}
			in.Join = []*pb.LockstepUser{userSettings()}
		}
		if slot == 10 && users[0].active { // a bad message on purpose: refused, nothing lost
			bad := client.LockstepSlotInput{SIRdB: append([]float64{math.NaN()}, sir[1:]...)}
			_, err := sess.StepSlot(bad)
			se, ok := client.AsLockstepSlotError(err)
			if !ok {
				return sum, fmt.Errorf("slot %d: a non-finite SIR gave %v, want a refused slot", slot, err)
			}
			sum.SlotErrors++
			sum.LastViolation = se.Violations[0].Field
		}
		r, err := sess.StepSlot(in)
		if err != nil {
			return sum, fmt.Errorf("slot %d: %w", slot, err)
		}
		target = r.GetTargetDb()
		if slot >= p.Slots/2 {
			for i, u := range users {
				if u.active {
					errAbs += math.Abs(sir[i] - target[i])
					nErr++
				}
			}
		}
		// Powers for the next slot.
		if changing {
			users[0].gone = true
			users = append(users, newUser(rng))
			sum.ChangeSlot, sum.LeftUser, sum.JoinedUser = int64(slot), 0, len(users)-1
			sum.JoinPowerDBm = r.GetTxPowerDbm()[len(users)-1]
		}
		for i, u := range users {
			u.powDBm = r.GetTxPowerDbm()[i]
		}
	}
	if err := sess.Close(); err != nil {
		return sum, fmt.Errorf("closing: %w", err)
	}
	sum.Users, sum.Slots = sess.Users(), p.Slots
	sum.SIRErrorDB = errAbs / float64(nErr)
	sum.Blocks = blocks
	sum.BLER = float64(blockErrs) / float64(blocks)
	var t float64
	var nt int
	for i, u := range users {
		if !u.gone {
			t += target[i]
			nt++
		}
	}
	sum.MeanTargetDB = t / float64(nt)
	return sum, nil
}

func bestCell(x float64) int {
	b := 0
	for c := range cellsX {
		if math.Abs(x-cellsX[c]) < math.Abs(x-cellsX[b]) {
			b = c
		}
	}
	return b
}

func dbmToMW(dbm float64) float64 { return math.Pow(10, dbm/10) }
