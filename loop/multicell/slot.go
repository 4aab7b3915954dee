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
func (rp *rep) slot(t int64, k int) {
	U, C := rp.U, rp.C
	p := rp.powers()
	if rp.full {
		for c := 0; c < C; c++ {
			s := 0.0
			f := rp.fullBuf
			for u := 0; u < U; u++ {
				s += p[u] * rp.slow[u*C+c] * f[c*U+u][k]
			}
			rp.rx[c] = rp.noiseMW + s
			rp.own[c] = 0
		}
	} else {
		if rp.stale || rp.sinceSum >= fullSumSlots {
			rp.split(job{kind: jobSums})
			rp.stale, rp.sinceSum = false, 0
		}
		rp.sinceSum++
		for c, s := range rp.sums {
			rp.rx[c] = rp.noiseMW + s
			rp.own[c] = 0
		}
		for u := range rp.users {
			us := &rp.users[u]
			for _, l := range us.act[:us.nLegs] {
				if f := rp.fade[u*maxLegsPerUser+int(l)]; f != nil {
					rp.rx[us.legs[l]] += p[u] * us.legG[l] * (f[k] - 1)
				}
			}
		}
	}
	measure := t >= rp.cfg.Run.WarmupSlots
	il := rp.cfg.InnerLoop
	ol := rp.cfg.OuterLoop
	sigma := il.SIREstimationErrorDB * math.Ln10 / 10
	blockEnd := (t+1)%int64(ol.BlockSlots) == 0
	ups, downs := 0, 0
	for u := range rp.users {
		us := &rp.users[u]
		bestSIR := 0.0
		allUp := true
		anyOK := false
		for _, l := range us.act[:us.nLegs] {
			c := us.legs[l]
			sig := p[u] * us.legG[l] * rp.legFade(u, int(l), k)
			if c == us.best {
				rp.own[c] += sig
			}
			sir := rp.pg * sig / fmax(rp.rx[c]-sig, rp.noiseMW)
			bestSIR = fmax(bestSIR, sir)
			us.legAcc[l] += sir
			us.legN[l]++
			if il.Mode == InnerModeClosedLoop {
				m := sir
				if sigma > 0 {
					m *= math.Exp(sigma * us.rng.NormFloat64())
				}
				up := m < us.target
				if il.CommandErrorProb > 0 && us.rng.Float64() < il.CommandErrorProb {
					up = !up
				}
				allUp = allUp && up
			}
			if blockEnd {
				mean := us.legAcc[l] / float64(us.legN[l])
				bler := 1 / (1 + math.Exp((10*math.Log10(mean)-rp.cfg.Link.ThresholdDB)/rp.cfg.Link.SlopeDB))
				if us.rng.Float64() >= bler {
					anyOK = true
				}
				us.legAcc[l], us.legN[l] = 0, 0
			}
		}
		if measure {
			rp.stats.user(u, us, bestSIR, p[u])
		}
		if blockEnd {
			blockErr := !anyOK
			if measure {
				rp.stats.block(blockErr)
			}
			if ol.Enabled && !(ol.FreezeAtMaxPower && p[u] >= rp.pmax) {
				if blockErr {
					us.targetDB += ol.UpStepDB
				} else {
					us.targetDB -= ol.UpStepDB * ol.BLERTarget / (1 - ol.BLERTarget)
				}
				us.setTarget(math.Min(ol.MaxTargetDB, math.Max(ol.MinTargetDB, us.targetDB)))
			}
		}
		// Power of the next slot.
		switch il.Mode {
		case InnerModeIdeal:
			if bestSIR > 0 {
				us.setP(rp.clamp(us.p * us.target / bestSIR))
			}
		default:
			d := len(us.cmds)
			cmd := int8(-1)
			if allUp {
				cmd = 1
			}
			applied := us.cmds[int(t%int64(d))]
			us.cmds[int(t%int64(d))] = cmd
			if d == 1 {
				applied = cmd
			} else if t < int64(d) {
				applied = 0
			}
			rp.applyCommand(us, applied)
			if applied > 0 {
				ups++
			} else if applied < 0 {
				downs++
			}
		}
	}
	if measure {
		rp.stats.cells(rp)
	}
	rp.updateSums(ups, downs)
}

// updateSums brings the cell sums to the next slot's powers. Closed loop
// without open loop, most users move by the same factor b (the step down,
// or up when more users went up): Σ_u p'_u·G_cu = b·Σ_u p_u·G_cu +
// Σ_u (p'_u − b·p_u)·G_cu, where the last sum has terms only for the users
// that moved otherwise (p'_u = b·p_u exactly for the others: the same
// product as applyCommand's). That costs C per such user instead of C·U.
// The sums are recomputed in full after slow-gain updates and at least
// every fullSumSlots slots, which bounds the rounding (relative 1e-16 per
// slot). Ideal or open-loop power control: full recomputation.
func (rp *rep) updateSums(ups, downs int) {
	if rp.full {
		return
	}
	if rp.cfg.InnerLoop.Mode != InnerModeClosedLoop || rp.cfg.OpenLoop.Enabled {
		rp.stale = true
		return
	}
	b := rp.downLin
	if ups > downs {
		b = rp.upLin
	}
	for c := range rp.sums {
		rp.sums[c] *= b
	}
	C := rp.C
	sums := rp.sums
	for u := range rp.users {
		d := rp.users[u].p - b*rp.pOld[u]
		if d == 0 {
			continue
		}
		row := rp.slow[u*C : u*C+C]
		s := sums[:len(row)]
		for c, g := range row {
			s[c] += d * g
		}
	}
}

// sumsRange recomputes the cell sums of cells [lo, hi) from this slot's
// powers (pOld), adding users in order.
func (rp *rep) sumsRange(lo, hi int) {
	C := rp.C
	s := rp.sums[lo:hi]
	clear(s)
	for u, pu := range rp.pOld {
		row := rp.slow[u*C+lo : u*C+hi]
		row = row[:len(s)]
		for i, g := range row {
			s[i] += pu * g
		}
	}
}

// legFade is the fast-fading power gain of leg slot l of user u in slot k
// of the current block.
func (rp *rep) legFade(u, l, k int) float64 {
	switch {
	case rp.full:
		return rp.fullBuf[rp.users[u].legs[l]*rp.U+u][k]
	case rp.fade[u*maxLegsPerUser+l] != nil:
		return rp.fade[u*maxLegsPerUser+l][k]
	}
	return 1
}

// applyCommand moves the power by one step, without accumulating past the
// limits; with the open loop, the step goes into the closed-loop correction.
func (rp *rep) applyCommand(us *user, cmd int8) {
	if cmd == 0 {
		return
	}
	if rp.cfg.OpenLoop.Enabled {
		base := rp.openLoopDBm(us)
		next := us.olCorrDB + float64(cmd)*rp.cfg.InnerLoop.StepDB
		pDBm := base + next
		if pDBm <= rp.cfg.InnerLoop.MaxPowerDBm && pDBm >= rp.cfg.InnerLoop.MinPowerDBm {
			us.olCorrDB = next
		}
		us.setP(rp.clamp(dbToLin(base + us.olCorrDB)))
		return
	}
	// One step: the dB value follows by ±step_db without a logarithm,
	// exact again at a limit.
	if cmd > 0 {
		if np := us.p * rp.upLin; np < rp.pmax {
			us.p, us.pDB = np, us.pDB+rp.cfg.InnerLoop.StepDB
		} else {
			us.setP(rp.pmax)
		}
	} else {
		if np := us.p * rp.downLin; np > rp.pmin {
			us.p, us.pDB = np, us.pDB-rp.cfg.InnerLoop.StepDB
		} else {
			us.setP(rp.pmin)
		}
	}
}

// setP sets the transmit power in mW and its dBm value pDB.
func (us *user) setP(p float64) {
	us.p = p
	us.pDB = 10 * math.Log10(p)
}

// powers returns the users' transmit powers of this slot (mW) in a reused slice.
func (rp *rep) powers() []float64 {
	for u := range rp.users {
		rp.pOld[u] = rp.users[u].p
	}
	return rp.pOld
}

// setTarget sets the SIR target in dB and its linear value.
func (us *user) setTarget(db float64) {
	us.targetDB = db
	us.target = dbToLin(db)
}

// fmax and fmin are math.Max and math.Min for the engine's finite values
// (no NaN or signed-zero handling: a plain comparison, cheaper per slot).
func fmax(a, b float64) float64 {
	if a > b {
		return a
	}
	return b
}

func fmin(a, b float64) float64 {
	if a < b {
		return a
	}
	return b
}

// dbToLin is 10^(x/10).
func dbToLin(x float64) float64 { return math.Exp(x * (math.Ln10 / 10)) }
