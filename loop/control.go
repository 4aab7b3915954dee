package loop

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/fadeloop/fadeloop/fading"
)

// Adaptive-step rule (COMMAND_ADAPTIVE): Jayant's adaptive delta modulation
// with one-bit memory (Jayant, Bell Syst. Tech. J. 49(2), 1970 (memory)),
// applied at the transmitter to the received one-bit commands: the step is
// step_db·K^j; j rises by one when a command repeats the previous one and
// falls by one when it reverses, within [AdaptiveMinExp, AdaptiveMaxExp].
// Large steps chase deep fades quickly, small ones settle the limit cycle.
const (
	AdaptiveRatio  = 1.5 // K, the step multiplier (Jayant's P, with Q = 1/P)
	AdaptiveMinExp = -2  // smallest step step_db·K^−2 (0.44·step_db)
	AdaptiveMaxExp = 2   // largest step step_db·K^2 (2.25·step_db)
)

// noCommand marks an empty slot of the feedback delay line.
const noCommand = -1

// bank is the power-control state of n users in structure-of-arrays form:
// transmit power, the feedback delay line of received commands, the SIR
// estimate filter and the outer-loop target. It is the one implementation
// of the control law; the engine steps all users of a replication with it
// and Controller steps one. Powers are linear, in mW; command steps are
// precomputed linear factors, so a slot costs multiplications and compares
// only. Per slot, in order: apply (commands due now change the power),
// the caller measures the SIR with that power, decide (commands of this slot
// enter the delay line).
type bank struct {
	n          int
	mode       InnerMode
	cmd        Command
	pmin, pmax float64 // mW

	p []float64 // transmit power, mW

	// Feedback delay line: d1 = D+1 rows of n received command indices.
	d1   int
	ring []int8
	pos  int

	// FIXED_STEP / MULTI_LEVEL: level i changes the power by levelDB[i].
	levelDB     []float64
	levelFactor []float64
	thrFactor   []float64 // MULTI_LEVEL: SIR-error thresholds as linear ratios, ascending
	decided     []int8    // command decided in the last decide, per user

	// ADAPTIVE: per user step exponent and last received bit.
	adJ    []int8
	adLast []int8
	adUp   []float64 // factor of an up step by exponent j−AdaptiveMinExp
	adDown []float64
	adDB   []float64

	// SIR estimate moving average over avgK slots.
	avgK    int
	avgBuf  []float64
	avgN    []int32
	avgHead []int32

	// Outer loop.
	outer     OuterLoop
	downDB    float64
	targetDB  []float64
	target    []float64 // linear
	invTarget []float64
}

// newBank builds the controllers of n users; initialPower[i] is user i's
// first transmit power in mW (already within limits).
func newBank(n int, il InnerLoop, ol OuterLoop, avgSlots int, initialPowerMW []float64) *bank {
	b := &bank{n: n, mode: il.Mode, cmd: il.Command, outer: ol, downDB: ol.DownStepDB()}
	b.pmin, b.pmax = dbToLin(il.MinPowerDBm), dbToLin(il.MaxPowerDBm)
	b.p = append([]float64(nil), initialPowerMW...)
	b.d1 = il.FeedbackDelaySlots + 1
	b.ring = make([]int8, b.d1*n)
	for i := range b.ring {
		b.ring[i] = noCommand
	}
	b.decided = make([]int8, n)
	switch il.Command {
	case CommandMultiLevel:
		b.levelDB = append([]float64(nil), il.LevelsDB...)
		for _, t := range il.ThresholdsDB {
			b.thrFactor = append(b.thrFactor, dbToLin(t))
		}
	default:
		b.levelDB = []float64{-il.StepDB, il.StepDB}
	}
	for _, x := range b.levelDB {
		b.levelFactor = append(b.levelFactor, dbToLin(x))
	}
	if il.Command == CommandAdaptive {
		b.adJ = make([]int8, n)
		b.adLast = make([]int8, n)
		for i := range b.adLast {
			b.adLast[i] = noCommand
		}
		for j := AdaptiveMinExp; j <= AdaptiveMaxExp; j++ {
			d := il.StepDB * math.Pow(AdaptiveRatio, float64(j))
			b.adDB = append(b.adDB, d)
			b.adUp = append(b.adUp, dbToLin(d))
			b.adDown = append(b.adDown, dbToLin(-d))
		}
	}
	b.avgK = max(avgSlots, 1)
	if b.avgK > 1 {
		b.avgBuf = make([]float64, n*b.avgK)
		b.avgN = make([]int32, n)
		b.avgHead = make([]int32, n)
	}
	b.targetDB = make([]float64, n)
	b.target = make([]float64, n)
	b.invTarget = make([]float64, n)
	for i := range n {
		b.setTarget(i, ol.InitialTargetDB)
	}
	return b
}

func (b *bank) setTarget(i int, db float64) {
	b.targetDB[i] = db
	b.target[i] = dbToLin(db)
	b.invTarget[i] = 1 / b.target[i]
}

func (b *bank) clamp(x float64) float64 {
	if x > b.pmax {
		return b.pmax
	}
	if x < b.pmin {
		return b.pmin
	}
	return x
}

// apply changes each user's power by the command due in this slot (decided
// D+1 slots ago), clamping to [min, max]: a command past a limit is not
// accumulated (3GPP TS 36.213 §5.1.1.1 (memory)).
func (b *bank) apply() {
	if b.mode != InnerModeClosedLoop {
		return
	}
	row := b.ring[b.pos*b.n : b.pos*b.n+b.n]
	p := b.p[:len(row)]
	if b.cmd == CommandAdaptive {
		for u, c := range row {
			if c == noCommand {
				continue
			}
			j := b.adJ[u]
			if last := b.adLast[u]; last != noCommand {
				if c == last {
					j = min(j+1, AdaptiveMaxExp-AdaptiveMinExp)
				} else {
					j = max(j-1, 0)
				}
			} else {
				j = -AdaptiveMinExp
			}
			b.adJ[u], b.adLast[u] = j, c
			f := b.adDown[j]
			if c == 1 {
				f = b.adUp[j]
			}
			p[u] = b.clamp(p[u] * f)
		}
		return
	}
	lf := b.levelFactor
	pmin, pmax := b.pmin, b.pmax
	for u, c := range row {
		if c == noCommand {
			continue
		}
		x := p[u] * lf[c]
		if x > pmax {
			x = pmax
		} else if x < pmin {
			x = pmin
		}
		p[u] = x
	}
}

// decide takes each user's measured SIR (linear) of this slot, filters it
// (moving average), decides its command and puts it, as received, into the
// delay line. errOff (nil: no errors) is the command error of each user: 0
// for none, k > 0 turns level c into level (c+k) mod levels (a bit flip for
// one-bit commands). active (nil: all) freezes inactive users: no command.
// It advances the delay line by one slot.
func (b *bank) decide(meas []float64, errOff []uint8, active []uint8) {
	n := b.n
	if b.mode == InnerModeClosedLoop {
		meas = meas[:n]
		if b.avgK > 1 {
			b.average(meas, active)
		}
		dec := b.decided[:n]
		inv := b.invTarget[:n]
		switch b.cmd {
		case CommandMultiLevel:
			top := int8(len(b.levelDB) - 1)
			for u, m := range meas {
				r := m * inv[u]
				c := top
				for _, t := range b.thrFactor {
					if r >= t {
						c--
					}
				}
				dec[u] = c
			}
		default:
			// Up (1) when the estimate is below target: the sign bit of
			// m/γ − 1, branch-free (the decision is a coin flip in a fading
			// channel, a branch would be mispredicted half the time).
			for u, m := range meas {
				dec[u] = int8(math.Float64bits(m*inv[u]-1) >> 63)
			}
		}
	}
	b.send(errOff, active)
}

// send puts the commands of b.decided, as received, into the delay line
// (CLOSED_LOOP; errOff and active as in decide) and advances it by one
// slot.
func (b *bank) send(errOff []uint8, active []uint8) {
	n := b.n
	if b.mode == InnerModeClosedLoop {
		row := b.ring[b.pos*n : b.pos*n+n]
		copy(row, b.decided[:n])
		if errOff != nil {
			nl := uint8(len(b.levelDB))
			for u, k := range errOff[:n] {
				if k != 0 {
					row[u] = int8((uint8(row[u]) + k) % nl)
				}
			}
		}
		if active != nil {
			for u, a := range active[:n] {
				if a == 0 {
					row[u] = noCommand
				}
			}
		}
	}
	b.pos++
	if b.pos == b.d1 {
		b.pos = 0
	}
}

// average replaces meas by the mean of the last avgK measurements of each
// active user (linear).
func (b *bank) average(meas []float64, active []uint8) {
	k := int32(b.avgK)
	for u := range meas {
		if active != nil && active[u] == 0 {
			continue
		}
		buf := b.avgBuf[u*b.avgK : (u+1)*b.avgK]
		h := b.avgHead[u]
		buf[h] = meas[u]
		h++
		if h == k {
			h = 0
		}
		b.avgHead[u] = h
		if b.avgN[u] < k {
			b.avgN[u]++
		}
		s := 0.0
		for _, x := range buf[:b.avgN[u]] {
			s += x
		}
		meas[u] = s / float64(b.avgN[u])
	}
}

// invert is the distributed power-control step of Foschini & Miljanic (IEEE
// Trans. Veh. Technol. 42(4), 1993): p ← clamp(p · γ*/SIR), the exact
// inversion against the interference just measured. sir is linear; users
// with sir <= 0 keep their power.
func (b *bank) invert(sir []float64) {
	for u, s := range sir[:b.n] {
		if s > 0 {
			b.p[u] = b.clamp(b.p[u] * b.target[u] / s)
		}
	}
}

// blockEnd runs the outer loop's jump rule for user u after a block:
// target += up_step_db on a block error, −= up_step_db·τ/(1−τ) otherwise,
// within the target limits (Sampath, Kumar & Holtzman, IEEE VTC 1997); with
// freeze_at_max_power the target holds while the user is at maximum power.
func (b *bank) blockEnd(u int, blockErr bool) {
	if !b.outer.Enabled {
		return
	}
	if b.outer.FreezeAtMaxPower && b.p[u] >= b.pmax {
		return
	}
	t := b.targetDB[u]
	if blockErr {
		t += b.outer.UpStepDB
	} else {
		t -= b.downDB
	}
	t = math.Min(math.Max(t, b.outer.MinTargetDB), b.outer.MaxTargetDB)
	if t != b.targetDB[u] {
		b.setTarget(u, t)
	}
}

// commandDB is the nominal power change in dB of the command decided for
// user u in the last decide.
func (b *bank) commandDB(u int) float64 {
	if b.mode != InnerModeClosedLoop {
		return 0
	}
	c := b.decided[u]
	if b.cmd == CommandAdaptive {
		j := b.adJ[u]
		if b.adLast[u] == noCommand {
			j = -AdaptiveMinExp
		}
		if c == 1 {
			return b.adDB[j]
		}
		return -b.adDB[j]
	}
	return b.levelDB[c]
}

// openLoopPowerMW is the open-loop initial power: the power that reaches the
// SIR target against thermal noise alone at the mean path loss,
// p0 = γ·N / (G_p · 10^(−L/10)), clamped to [min, max] (mW).
func openLoopPowerMW(targetDB, noiseMW, processingGain, pathLossDB, pminMW, pmaxMW float64) float64 {
	p := dbToLin(targetDB) * noiseMW / (processingGain * dbToLin(-pathLossDB))
	if !(p <= pmaxMW) {
		return pmaxMW
	}
	if p < pminMW {
		return pminMW
	}
	return p
}

// ControlDecision is a Controller's answer to one slot.
type ControlDecision struct {
	CommandDB float64 // command decided from the slot's measurement, nominal dB (e.g. ±step_db, one of levels_db); 0 outside CLOSED_LOOP
	PowerDBm  float64 // transmit power for the next slot (feedback delay and power limits included), dBm
	TargetDB  float64 // SIR target after the slot's outer-loop update, dB
}

// decisionGuard bounds |ln(m/γ)| below which Controller.Step decides a
// one-bit command from the linear estimate m/γ − 1, as the bank does: the
// two forms carry rounding errors of a few 1e−15 for SIRs and targets
// within ±100 dB, far below it.
const decisionGuard = 1e-9

// Controller is the inner and outer loop of one user, for co-simulation
// (the Lockstep RPC): an external simulator reports each slot's measured SIR
// and any block CRC result, and the Controller answers with the command,
// the next transmit power and the target. It runs the same control law as
// the engine (type bank): feedback delay D (a command from slot t changes
// the power of slot t+1+D), command errors, SIR estimation error and
// averaging of the Receiver, power limits without accumulation, and the
// jump-rule outer loop. INNER_MODE_IDEAL applies the Foschini–Miljanic step
// p ← p·γ*/SIR to the measurement; INNER_MODE_FIXED_POWER holds
// fixed_power_dbm. A Controller is not safe for concurrent use; Step
// allocates nothing.
type Controller struct {
	b        *bank
	memoP    [2]float64 // the last two transmit powers (mW) converted to dBm, newest first
	memoDBm  [2]float64
	meas     [1]float64
	off      [1]uint8
	sigmaLn  float64 // estimation error σ in natural-log units
	errP     float64
	measRand *rand.Rand
	cmdRand  *rand.Rand
}

// NewController builds one user's controller from the loop settings of a
// scenario (call Normalise on a scenario first, or fill every field).
// pathLossDB is the user's mean path loss, used for the open-loop initial
// power; seed and user select the random streams of command and estimation
// errors (fading.NewStream kinds of package loop). It returns Violations
// naming the fields (`inner_loop.*`, `outer_loop.*`, `receiver.*`).
func NewController(il InnerLoop, ol OuterLoop, rcv Receiver, pathLossDB float64, seed uint64, user int) (*Controller, error) {
	c := &checker{}
	c.inner(il)
	c.outer(ol)
	c.rng("receiver.sir_estimation_error_db", rcv.SIREstimationErrorDB, 0, 20, " dB")
	if rcv.SIRAveragingSlots < 0 || rcv.SIRAveragingSlots > MaxAveraging {
		c.add("receiver.sir_averaging_slots", "must be in [0, %d], got %d", MaxAveraging, rcv.SIRAveragingSlots)
	}
	c.rng("path_loss_db", pathLossDB, 0, 300, " dB")
	if il.InitialPower == InitialPowerOpenLoop {
		c.pos("receiver.chip_rate_hz", rcv.ChipRateHz, 1e10, " Hz")
		c.pos("receiver.bit_rate_bps", rcv.BitRateBps, 1e10, " bit/s")
		c.rng("receiver.noise_figure_db", rcv.NoiseFigureDB, 0, 30, " dB")
	}
	if user < 0 {
		c.add("user", "must be >= 0, got %d", user)
	}
	if len(c.v) > 0 {
		return nil, c.v
	}
	p0 := initialPowerMW(il, ol, rcv, pathLossDB)
	ctl := &Controller{
		b:        newBank(1, il, ol, rcv.SIRAveragingSlots, []float64{p0}),
		sigmaLn:  rcv.SIREstimationErrorDB * math.Ln10 / 10,
		errP:     il.CommandErrorProb,
		measRand: fading.NewStream(seed, user, 0, streamMeasErr),
		cmdRand:  fading.NewStream(seed, user, 0, streamCmdErr),
		memoP:    [2]float64{math.NaN(), math.NaN()},
	}
	return ctl, nil
}

// initialPowerMW is a user's first transmit power in mW.
func initialPowerMW(il InnerLoop, ol OuterLoop, rcv Receiver, pathLossDB float64) float64 {
	pmin, pmax := dbToLin(il.MinPowerDBm), dbToLin(il.MaxPowerDBm)
	switch {
	case il.Mode == InnerModeFixedPower:
		return dbToLin(il.FixedPowerDBm)
	case il.InitialPower == InitialPowerFixed:
		return dbToLin(il.InitialPowerDBm)
	}
	return openLoopPowerMW(ol.InitialTargetDB, dbToLin(rcv.NoiseDBm()), rcv.ProcessingGain(), pathLossDB, pmin, pmax)
}

// PowerDBm is the transmit power of the coming slot in dBm.
func (c *Controller) PowerDBm() float64 {
	// linToDB remembered for the last two powers: in the limit cycle of
	// a fixed step, at a power limit and while inactive the power returns
	// exactly to a recent value.
	p := c.b.p[0]
	switch p {
	case c.memoP[0]:
		return c.memoDBm[0]
	case c.memoP[1]:
		return c.memoDBm[1]
	}
	db := linToDB(p)
	c.memoP[1], c.memoDBm[1] = c.memoP[0], c.memoDBm[0]
	c.memoP[0], c.memoDBm[0] = p, db
	return db
}

// TargetDB is the current SIR target in dB.
func (c *Controller) TargetDB() float64 { return c.b.targetDB[0] }

// Step processes one slot: blockError, when not nil, is the CRC outcome of
// a block that ended in this slot (true: the block was in error) and moves
// the target first; measuredSIRdB is the SIR measured in this slot (the
// Receiver's estimation error and averaging are applied on top). It returns
// the command decided, the transmit power of the next slot and the target.
// A non-finite measurement is treated as a very low SIR (−100 dB).
func (c *Controller) Step(measuredSIRdB float64, blockError *bool) ControlDecision {
	b := c.b
	if blockError != nil {
		b.blockEnd(0, *blockError)
	}
	if !fin(measuredSIRdB) {
		measuredSIRdB = -100
	}
	var z float64 // estimation error draw
	if c.sigmaLn > 0 {
		z = c.measRand.NormFloat64()
	}
	// One-bit decisions without averaging: the sign of ln(m/γ) =
	// (x − γ_dB)·ln10/10 + σ·z, which is the sign of m/γ − 1 whenever it
	// is clear of 0 by far more than the rounding of either form; closer to
	// 0 (and for the other cases) the estimate is formed in linear units
	// as the bank does. The command is the same either way.
	fast := b.mode == InnerModeClosedLoop && b.avgK == 1 && b.cmd != CommandMultiLevel
	if fast {
		d := (measuredSIRdB-b.targetDB[0])*(math.Ln10/10) + c.sigmaLn*z
		if fast = math.Abs(d) > decisionGuard; fast {
			b.decided[0] = 0
			if d < 0 {
				b.decided[0] = 1
			}
		}
	}
	var off []uint8
	if c.errP > 0 {
		c.off[0] = 0
		if c.cmdRand.Float64() < c.errP {
			c.off[0] = uint8(1 + c.cmdRand.IntN(len(b.levelDB)-1))
		}
		off = c.off[:]
	}
	if !fast {
		m := dbToLin(measuredSIRdB)
		if c.sigmaLn > 0 {
			m *= math.Exp(c.sigmaLn * z)
		}
		c.meas[0] = m
	}
	switch {
	case b.mode == InnerModeIdeal:
		b.invert(c.meas[:])
	case fast:
		b.send(off, nil)
	case b.mode == InnerModeClosedLoop:
		b.decide(c.meas[:], off, nil)
	}
	b.apply()
	return ControlDecision{CommandDB: b.commandDB(0), PowerDBm: c.PowerDBm(), TargetDB: b.targetDB[0]}
}

// StepInactive processes one slot in which the user does not transmit
// (DTX, idle): no measurement, no new command (CommandDB 0), no
// estimation-error or command-error draw; the SIR-averaging window keeps
// its samples; commands already in the feedback delay line still arrive and
// change the power (a command from slot t changes slot t+1+D whatever the
// user does meanwhile); the target holds. INNER_MODE_IDEAL and
// FIXED_POWER hold the power. It allocates nothing.
func (c *Controller) StepInactive() ControlDecision {
	b := c.b
	if b.mode == InnerModeClosedLoop {
		c.off[0] = 0 // active mask of one user: inactive
		b.decide(c.meas[:], nil, c.off[:])
		b.apply()
	}
	return ControlDecision{PowerDBm: c.PowerDBm(), TargetDB: b.targetDB[0]}
}

// String describes the controller's settings briefly.
func (c *Controller) String() string {
	return fmt.Sprintf("controller(%s, %s, delay %d)", c.b.mode, c.b.cmd, c.b.d1-1)
}
