package multicell

import "math"

// slot runs one slot: received powers, SIRs, commands, the outer loop, the
// statistics and the power update.
//
// Received power at cell c: N + Σ_u p_u·G_cu·F_cu, with F_cu the fast
// fading on the user's active-set legs and 1 toward other cells (FULL:
// every link fades). The slow part Σ_u p_u·G_cu (rep.sums) is kept up to
// date incrementally (updateSums); the active-set legs add their fading
// correction p·G·(F − 1).
//
// The slot runs on the replication's goroutine: handing half of it to the
// helper every slot (two hand-offs per slot) was measured slower on the
// shared 2-core machine (see fill.go's split for the per-block hand-offs).
func (rp *rep) slot(t int64, k int) {
	if rp.legs.dirty {
		rp.buildLegs()
	}
	if rp.full {
		U, C := rp.U, rp.C
		f := rp.fullBuf
		for c := 0; c < C; c++ {
			s := 0.0
			for u := 0; u < U; u++ {
				s += rp.users[u].p * rp.slow[u*C+c] * f[c*U+u][k]
			}
			rp.rx[c] = rp.noiseMW + s
		}
	} else {
		il := rp.cfg.InnerLoop
		if rp.stale || rp.sinceSum >= fullSumSlots || il.Mode != InnerModeClosedLoop || rp.cfg.OpenLoop.Enabled {
			rp.fullSums()
			rp.stale, rp.sinceSum = false, 0
		} else {
			rp.updateSums()
		}
		rp.sinceSum++
		if !rp.corrReady {
			clear(rp.corr)
			if rp.fade != nil { // else no fast fading: no corrections
				// pPrev as scratch for this slot's powers (updateSums has
				// read the last slot's; runUsers sets them again).
				for u := range rp.users {
					rp.pPrev[u] = rp.users[u].p
				}
				rp.legCorrections(rp.corr, rp.pPrev, rp.fade[k*rp.fadeStride:(k+1)*rp.fadeStride])
			}
		}
		for c, s := range rp.sums {
			rp.rx[c] = rp.noiseMW + s + rp.corr[c]
		}
	}
	// The next slot's leg corrections can be added as each user's next
	// power is set when its legs and their gains stay: same block (no
	// active-set update), no shadowing update.
	ahead := !rp.full && k+1 < rp.blockN && (t+1)%int64(rp.cfg.Channel.ShadowingSlots) != 0
	if ahead {
		clear(rp.corrNext)
	}
	clear(rp.own)
	rp.runUsers(t, k, ahead)
	rp.corr, rp.corrNext = rp.corrNext, rp.corr
	rp.corrReady = ahead
	if t >= rp.cfg.Run.WarmupSlots {
		C := rp.C
		copy(rp.rec.rx[k*C:(k+1)*C], rp.rx)
		copy(rp.rec.own[k*C:(k+1)*C], rp.own)
	}
}

// fullSums computes the cell sums Σ_u p_u·G_cu at this slot's powers,
// adding users in order.
func (rp *rep) fullSums() {
	C := rp.C
	s := rp.sums
	ps := rp.pFull[:len(rp.users)]
	for u := range rp.users {
		ps[u] = rp.users[u].p
	}
	if fullSumsFast(s, ps, rp.slow) {
		return
	}
	clear(s)
	for u, p := range ps {
		addScaled(s, p, rp.slow[u*C:u*C+C])
	}
}

// updateSums brings the cell sums from the last slot's powers (pPrev) to
// this slot's (pCur). Closed loop without open loop, most users moved by
// the same factor b (the step down, or up when more users went up):
// Σ_u p'_u·G_cu = b·Σ_u p_u·G_cu + Σ_u (p'_u − b·p_u)·G_cu, where the last
// sum has terms only for the users that moved otherwise (p'_u = b·p_u
// exactly for the others: the same product as stepPower's). That costs
// C per such user instead of C·U. slot recomputes the sums in full after
// slow-gain updates, at least every fullSumSlots slots (which bounds the
// rounding: relative error below 1e-10, TestCellSumsTrackPowers), and every slot with ideal or
// open-loop power control.
func (rp *rep) updateSums() {
	b := rp.downLin
	if rp.ups > rp.downs {
		b = rp.upLin
	}
	s := rp.sums
	if updateSumsFast(s, b, rp.pCur, rp.pPrev, rp.slow, rp.movers, rp.moverD) {
		return
	}
	for c := range s {
		s[c] *= b
	}
	// The movers first, without a branch per user (about half the users
	// move otherwise, at random), then their rows.
	C := rp.C
	pPrev := rp.pPrev[:len(rp.pCur)]
	mv, dv := rp.movers[:len(rp.pCur)], rp.moverD[:len(rp.pCur)]
	n := 0
	for u, pu := range rp.pCur {
		d := pu - b*pPrev[u]
		mv[n], dv[n] = int32(u), d
		inc := 0
		if d != 0 {
			inc = 1
		}
		n += inc
	}
	for i, u := range mv[:n] {
		addScaled(s, dv[i], rp.slow[int(u)*C:int(u)*C+C])
	}
}

// runUsers runs slot t for every user: SIR per leg, commands combined by the
// up-only-if-all-up rule, the block result and outer loop (at block ends,
// blockResult and outerLoop), the power of the next slot (pCur; pPrev
// keeps this slot's) and, when ahead, the next slot's leg corrections
// (corrNext).
//
// This is the hot path, in three loops without a branch on a user's leg
// count: the SIR of every active-set leg (over rep.legs: no random draws),
// then per user its best SIR and command from its max_active leg ranks
// (unused ranks hold SIR 0, which changes neither), the draws in leg order
// as before, block ends (methods of their own) and the power step, then
// the next slot's corrections over rep.legs again. The branches left on
// the configuration (mode, FULL fading, estimation and command errors) go
// the same way for every user, so they cost no mispredictions.
func (rp *rep) runUsers(t int64, k int, ahead bool) {
	corrNext := rp.corrNext
	measure := t >= rp.cfg.Run.WarmupSlots
	il := &rp.cfg.InnerLoop
	sigma := il.SIREstimationErrorDB * math.Ln10 / 10
	cep := il.CommandErrorProb
	blockEnd := (t+1)%int64(rp.cfg.OuterLoop.BlockSlots) == 0
	closed := il.Mode == InnerModeClosedLoop
	openLoop := rp.cfg.OpenLoop.Enabled
	// The delay line's slot (every user's line has the same length).
	d := il.FeedbackDelaySlots + 1
	di := int(t % int64(d))
	started := t >= int64(d) // the delay line holds commands
	ups, downs := 0, 0
	var fNext []float64 // the next slot's leg gains (SLOW_TOWARD_OTHERS)
	if rp.fade != nil && ahead {
		fNext = rp.fade[(k+1)*rp.fadeStride : (k+2)*rp.fadeStride]
	}
	rec := rp.rec
	pAtMax := rp.pmax * (1 - 1e-12) // at max: within rounding of the limit
	// Loop invariants in locals (the stores below go through pointers).
	U := rp.U
	pPrev, pCur, cmds := rp.pPrev[:U], rp.pCur[:U], rp.cmds[:U*d]
	recSIR, recPDB, recTDB, recFlags := rec.sir[k*U:(k+1)*U], rec.pDB[k*U:(k+1)*U], rec.targetDB[k*U:(k+1)*U], rec.flags[k*U:(k+1)*U]
	marginLin := rp.marginLin
	lin, lim, limDB := rp.stepTables()
	stepDB := il.StepDB
	users := rp.users[:U]
	su := rp.slotU[:U]
	if !rp.suReady {
		// Each slot's loop over users prepares the next slot's entries;
		// the first slot, and one after powers or targets were set from
		// outside the slot loop, prepares them here.
		for u := range users {
			su[u] = userSlot{p: users[u].p, tgt: users[u].target, up: 1}
		}
	}
	ma := rp.cfg.Handover.MaxActive
	plain := sigma == 0 && cep == 0 // no draws per leg
	rp.legSIRs(rp.legGains(k), plain)
	legSIR := rp.legSIR
	if plain && closed && !openLoop && !blockEnd && d == 1 {
		if ups, downs, ok := rp.plainUsers(k, measure); ok {
			rp.ups, rp.downs = ups, downs
			rp.suReady = true
			if fNext != nil {
				rp.legCorrections(corrNext, pCur, fNext)
			}
			return
		}
	}
	if blockEnd {
		rp.blockBLERs()
	}
	li := 0 // the user's first leg in the leg list
	for u := range users {
		us := &users[u]
		pu := su[u].p
		pPrev[u] = pu
		bestSIR, upAll := su[u].best, su[u].up
		if !plain && closed {
			// The measured SIR and the command of each leg, drawing in leg
			// order.
			upAll = 1
			for _, sir := range legSIR[u*ma : u*ma+int(us.nLegs)] {
				m := sir
				if sigma > 0 {
					m *= math.Exp(sigma * us.ctl.Norm())
				}
				var up uint8
				if m < us.target {
					up = 1
				}
				if cep > 0 && us.ctl.Float64() < cep {
					up ^= 1
				}
				upAll &= up
			}
		}
		var blockFlags uint8
		if blockEnd {
			blockFlags = rp.blockResult(us, u, rp.legBLER[li:li+int(us.nLegs)])
		}
		if measure {
			recSIR[u], recPDB[u], recTDB[u] = bestSIR, us.pDB, us.targetDB
			// Flags set without a branch (outage is a coin flip too).
			var out, atMax uint8
			if bestSIR < us.target*marginLin {
				out = recOutage
			}
			if pu >= pAtMax {
				atMax = recAtMax
			}
			recFlags[u] = blockFlags | out | atMax
		}
		if blockEnd {
			rp.outerLoop(us, pu, blockFlags&recBlockErr != 0)
		}
		// Power of the next slot.
		if !closed { // ideal
			if bestSIR > 0 {
				us.setP(rp.clamp(us.p * us.target / bestSIR))
			}
		} else {
			// The command is a coin flip slot to slot: no branch on it
			// (nor on it below), only arithmetic.
			cmd := 2*int8(upAll) - 1
			applied := cmds[u*d+di]
			cmds[u*d+di] = cmd
			if d == 1 {
				applied = cmd
			} else if !started {
				applied = 0
			}
			if openLoop {
				rp.openLoopStep(us, applied)
			} else {
				us.stepPower(applied, &lin, &lim, &limDB, stepDB)
			}
			ups += int(applied+1) >> 1   // 1 for +1, 0 for 0 and −1
			downs += int(1-applied) >> 1 // 1 for −1, 0 for 0 and +1
		}
		pCur[u] = us.p
		su[u] = userSlot{p: us.p, tgt: us.target, up: 1} // the next slot's
		li += int(us.nLegs)
	}
	rp.ups, rp.downs = ups, downs
	rp.suReady = true
	if fNext != nil {
		rp.legCorrections(corrNext, pCur, fNext)
	}
}

// blockBLERs sets, at a slot that ends an outer-loop block, every
// active-set leg's block error probability (rep.legBLER, in leg-list
// order) from the mean SIR of its block: the link curve BLER =
// 1/(1 + e^z), z = (SIR dB − threshold)/slope (e^z = 10^(z·10/ln 10 / 10)
// by linFromDB), each conversion done for all legs in one call (the same
// values as one by one).
func (rp *rep) blockBLERs() {
	thr, slope := rp.cfg.Link.ThresholdDB, rp.cfg.Link.SlopeDB
	b := rp.legBLER[:len(rp.legs.e)]
	for i, e := range rp.legs.e {
		b[i] = rp.legAcc[e.j] / float64(rp.legN[e.j])
	}
	linToDBFloorTo(b, b, 0)
	for i, db := range b {
		b[i] = (db - thr) / slope * (10 / math.Ln10)
	}
	linFromDBInPlace(b)
	for i, x := range b {
		b[i] = 1 / (1 + x)
	}
}

// blockResult ends the user's outer-loop block on every leg: the block is
// received on a leg with probability 1 − BLER (bler: the user's legs'
// block error probabilities, blockBLERs), one draw per leg in leg order;
// selection combining: a block error when no leg received it. It returns
// recBlockEnd, with recBlockErr on a block error, and clears the legs'
// accumulators.
func (rp *rep) blockResult(us *user, u int, bler []float64) uint8 {
	anyOK := uint8(0)
	for k, l := range us.act[:us.nLegs] {
		j := u*rp.cfg.Handover.MaxActive + int(l)
		// The block result is a coin flip: set without a branch.
		var ok uint8
		if us.ctl.Float64() >= bler[k] {
			ok = 1
		}
		anyOK |= ok
		rp.legAcc[j], rp.legN[j] = 0, 0
	}
	return recBlockEnd | recBlockErr*(1-anyOK)
}

// outerLoop moves the user's SIR target after a block (pu: the power it
// was sent with): up by up_step_db after a block error, down by
// up_step_db·BLER_target/(1 − BLER_target) otherwise (the jump algorithm,
// whose fixed point is the BLER target), within [min_target_db,
// max_target_db], frozen at max power when so configured.
func (rp *rep) outerLoop(us *user, pu float64, blockErr bool) {
	ol := &rp.cfg.OuterLoop
	if !ol.Enabled || ol.FreezeAtMaxPower && pu >= rp.pmax {
		return
	}
	if blockErr {
		us.targetDB += ol.UpStepDB
	} else {
		us.targetDB -= ol.UpStepDB * ol.BLERTarget / (1 - ol.BLERTarget)
	}
	us.setTarget(math.Min(ol.MaxTargetDB, math.Max(ol.MinTargetDB, us.targetDB)))
}

// openLoopStep applies a closed-loop command on top of the open loop: the
// step goes into the closed-loop correction, without accumulating past
// the power limits.
func (rp *rep) openLoopStep(us *user, cmd int8) {
	if cmd == 0 {
		return
	}
	base := rp.openLoopDBm(us)
	next := us.olCorrDB + float64(cmd)*rp.cfg.InnerLoop.StepDB
	pDBm := base + next
	if pDBm <= rp.cfg.InnerLoop.MaxPowerDBm && pDBm >= rp.cfg.InnerLoop.MinPowerDBm {
		us.olCorrDB = next
	}
	us.setP(rp.clamp(dbToLin(base + us.olCorrDB)))
}

// stepPower moves the power one step up (cmd > 0) or down (cmd < 0):
// p·upLin or p·downLin, without passing pmax or pmin (mW); the dB value
// follows by ±stepDB without a logarithm, exact again at a limit.
//
// The direction is picked by index, not by a branch (commands are up or
// down at random slot to slot); p stays in [pmin, pmax], so a step up
// stays above pmin and a step down below pmax.
// lin is {downLin, upLin}, lim {pmin, pmax} and limDB their dBm values as
// setP computes them (so a limit is set as setP would; no call: the
// method inlines into the slot loop).
func (us *user) stepPower(cmd int8, lin, lim, limDB *[2]float64, stepDB float64) {
	if cmd == 0 {
		return
	}
	i := (cmd + 1) >> 1 & 1 // 0 down, 1 up
	if np := us.p * lin[i]; np > lim[0] && np < lim[1] {
		us.p, us.pDB = np, us.pDB+stepDB*float64(cmd)
		return
	}
	us.p, us.pDB = lim[i], limDB[i]
}

// stepTables are stepPower's {downLin, upLin}, {pmin, pmax} and the
// limits' dBm values as setP computes them.
func (rp *rep) stepTables() (lin, lim, limDB [2]float64) {
	return [2]float64{rp.downLin, rp.upLin}, [2]float64{rp.pmin, rp.pmax},
		[2]float64{10 * math.Log10(rp.pmin), 10 * math.Log10(rp.pmax)}
}

// setP sets the transmit power in mW and its dBm value pDB.
func (us *user) setP(p float64) {
	us.p = p
	us.pDB = 10 * math.Log10(p)
}

// setTarget sets the SIR target in dB and its linear value.
func (us *user) setTarget(db float64) {
	us.targetDB = db
	us.target = dbToLin(db)
}

// dbToLin is 10^(x/10).
func dbToLin(x float64) float64 { return math.Exp(x * (math.Ln10 / 10)) }
