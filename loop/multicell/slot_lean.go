package multicell

import "math"

// leanSlot reports whether slot t can run runUsersLean: closed loop without
// open loop, fading sets (SLOW_TOWARD_OTHERS), and no outer-loop block
// ending in the slot.
func (rp *rep) leanSlot(t int64) bool {
	return useLean && rp.fade != nil && !rp.full && rp.cfg.InnerLoop.Mode == InnerModeClosedLoop &&
		!rp.cfg.OpenLoop.Enabled && (t+1)%int64(rp.cfg.OuterLoop.BlockSlots) != 0
}

// useLean selects runUsersLean where it applies (tests switch it off to
// compare).
var useLean = true

// runUsersLean is runUsers for the slots leanSlot admits, which are most
// of them: the same operations in the same order on the same values (so
// the same bits and the same random draws, TestLeanSlotsSameReport), with
// the paths those slots never take (block results and the outer loop,
// ideal and open-loop control, FULL fading) left out, so that the loop
// over users keeps its state in registers.
func (rp *rep) runUsersLean(t int64, k int, ahead bool) {
	rx, own, corrNext := rp.rx, rp.own, rp.corrNext
	measure := t >= rp.cfg.Run.WarmupSlots
	il := &rp.cfg.InnerLoop
	sigma := il.SIREstimationErrorDB * math.Ln10 / 10
	cep := il.CommandErrorProb
	d := il.FeedbackDelaySlots + 1
	di := int(t % int64(d))
	started := t >= int64(d) // the delay line holds commands
	ups, downs := 0, 0
	A := rp.legsPerUser
	fk := rp.fade[k*rp.fadeStride : (k+1)*rp.fadeStride]
	var fNext []float64
	if ahead {
		fNext = rp.fade[(k+1)*rp.fadeStride : (k+2)*rp.fadeStride]
	}
	rec := rp.rec
	pAtMax := rp.pmax * (1 - 1e-12)
	pg, noise, U := rp.pg, rp.noiseMW, rp.U
	pPrev, pCur, cmds := rp.pPrev[:U], rp.pCur[:U], rp.cmds[:U*d]
	recSIR, recPDB, recTDB, recFlags := rec.sir[k*U:(k+1)*U], rec.pDB[k*U:(k+1)*U], rec.targetDB[k*U:(k+1)*U], rec.flags[k*U:(k+1)*U]
	marginLin := rp.marginLin
	lin, lim, limDB := rp.stepTables()
	stepDB := il.StepDB
	users := rp.users[:U]
	for u := range users {
		us := &users[u]
		pu := us.p
		pPrev[u] = pu
		bestSIR := 0.0
		upAll := uint8(1)
		fu := fk[u*A : u*A+A]
		for _, l := range us.act[:us.nLegs] {
			lg := &us.leg[l]
			c := int(lg.c)
			sig := pu * lg.g * fu[l]
			if c == int(us.best) {
				own[c] += sig
			}
			sir := pg * sig / fmax(rx[c]-sig, noise)
			bestSIR = fmax(bestSIR, sir)
			lg.acc += sir
			lg.n++
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
		if measure {
			recSIR[u], recPDB[u], recTDB[u] = bestSIR, us.pDB, us.targetDB
			var fl uint8
			if bestSIR < us.target*marginLin {
				fl |= recOutage
			}
			if pu >= pAtMax {
				fl |= recAtMax
			}
			recFlags[u] = fl
		}
		cmd := 2*int8(upAll) - 1
		applied := cmds[u*d+di]
		cmds[u*d+di] = cmd
		if d == 1 {
			applied = cmd
		} else if !started {
			applied = 0
		}
		us.stepPower(applied, &lin, &lim, &limDB, stepDB)
		ups += int(applied+1) >> 1
		downs += int(1-applied) >> 1
		pCur[u] = us.p
		if ahead {
			us.addLegCorrections(corrNext, fNext[u*A:u*A+A])
		}
	}
	rp.ups, rp.downs = ups, downs
}
