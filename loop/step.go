package loop

// runBlock runs the slots of one generated block.
func (rp *replication) runBlock(buf *genBuf) {
	sh := rp.sh
	n, blk := rp.n, rp.rs
	b := rp.bank
	mode := b.mode
	matrix := sh.hk != nil && sh.hk.matrix != nil
	avg := b.avgK > 1
	needG := mode == InnerModeIdeal || rp.trace != nil
	for s := 0; s < buf.len; s++ {
		t := buf.t0 + int64(s)
		gcol := rp.gcol[:n]
		if needG {
			for u := range gcol {
				gcol[u] = buf.gain[u*blk+s]
			}
		}
		var act []uint8
		if buf.act != nil {
			act = rp.arow[:n]
			for u := range act {
				act[u] = buf.act[u*blk+s]
			}
		}
		// Commands due now change the powers.
		b.apply()
		if mode == InnerModeIdeal && !matrix {
			rp.idealSolve(gcol, act)
		}
		p := b.p[:n]
		rx, sir := rp.rx[:n], rp.sir[:n]
		var nr float64 // noise rise: total received power over thermal noise
		fused := false
		if matrix {
			nr = rp.matrixSIR(p, act)
		} else {
			tot := 0.0
			if act == nil {
				g := buf.gain[s:]
				for u := range rx {
					r := g[u*blk] * p[u]
					rx[u] = r
					tot += r
				}
			} else {
				for u := range rx {
					r := buf.gain[u*blk+s] * p[u] * float64(act[u])
					rx[u] = r
					tot += r
				}
			}
			X := sh.f1*tot + sh.noiseMW
			nr = X / sh.noiseMW
			if act == nil && !rp.sh.link.eesm && t >= sh.warm && rp.col.unconverged == 0 && (sh.hk == nil || !sh.hk.noFast) {
				// Fast path: SIR, figures and block accumulation in one pass.
				rp.col.slotFused(&rp.inputs, X)
				rp.effFused++
				fused = true
			} else {
				gp := sh.gp
				for u, r := range rx {
					sir[u] = sirOf(gp, r, X)
				}
			}
		}
		// The receiver measures and decides.
		switch mode {
		case InnerModeClosedLoop:
			meas := sir
			if buf.merr != nil || avg {
				meas = rp.meas[:n]
				if buf.merr != nil {
					for u := range meas {
						meas[u] = sir[u] * buf.merr[u*blk+s]
					}
				} else {
					copy(meas, sir)
				}
			}
			var cerr []uint8
			if buf.cerr != nil {
				cerr = rp.crow[:n]
				for u := range cerr {
					cerr[u] = buf.cerr[u*blk+s]
				}
			}
			b.decide(meas, cerr, act)
		case InnerModeIdeal:
			if matrix {
				b.invert(sir)
			}
		}
		if fused {
			rp.col.slotTail(t, nr)
		} else {
			rp.col.slot(t, &rp.inputs, nr, act)
			rp.accumulate(act)
		}
		if rp.trace != nil {
			rp.trace.slot(t, rp.sir, rp.bank.targetDB, rp.bank.p, rp.gcol, act)
		}
		rp.blockCheck(t)
	}
}

// sirOf is the SIR of a user at the shared receiver: G_p·r/(X − r), with r
// the user's received power and X = (1+f)·Σ r + N the total interference
// plus noise including the user itself (mW); G_p is the processing gain.
// The one place this formula is written.
func sirOf(gp, r, X float64) float64 { return gp * r / (X - r) }

// accumulate adds this slot to each active user's block accumulator of
// the effective SIR.
func (rp *replication) accumulate(act []uint8) {
	sir := rp.sir[:rp.n]
	lm := rp.sh.link
	acc, cnt := rp.effAcc[:rp.n], rp.effN[:rp.n]
	if lm.eesm {
		for u, s := range sir {
			if act == nil || act[u] != 0 {
				acc[u] += lm.term(s)
				cnt[u]++
			}
		}
	} else {
		for u, s := range sir {
			if act == nil || act[u] != 0 {
				acc[u] += s
				cnt[u]++
			}
		}
	}
}

// blockCheck, at a block end, draws each user's block error from the link
// curve at the block's effective SIR and runs the outer loop.
func (rp *replication) blockCheck(t int64) {
	if rp.blkLeft--; rp.blkLeft > 0 {
		return
	}
	rp.blkLeft = rp.blockB
	sir := rp.sir[:rp.n]
	lm := rp.sh.link
	acc, cnt := rp.effAcc[:rp.n], rp.effN[:rp.n]
	measured := t >= rp.sh.warm
	fz := rp.effFused
	rp.effFused = 0
	for u := range sir {
		k := cnt[u] + fz
		if k == 0 {
			continue
		}
		bl := lm.blockBLER(acc[u], int(k))
		e := rp.blkRand[u].Float64() < bl
		rp.bank.blockEnd(u, e)
		if measured {
			rp.col.block(u, e)
		}
		acc[u], cnt[u] = 0, 0
	}
}

// idealSolve sets every active user's power to the joint exact solution of
// SIR_i = γ_i for this slot's gains (single receiver): with c_i = γ_i/G_p,
// k_i = c_i/(1+c_i), X = (1+f)·R + N and r_i = k_i·X,
// X = ((1+f)·R_fixed + N) / (1 − (1+f)·Σ_free k_i); users whose power would
// leave [min, max] are clamped and the rest re-solved. When the free users'
// load (1+f)·Σ k_i reaches 1 the slot is infeasible and they go to maximum.
func (rp *replication) idealSolve(g []float64, act []uint8) {
	sh := rp.sh
	b := rp.bank
	n := rp.n
	k, fixed := rp.idK[:n], rp.idFixed[:n]
	p := b.p[:n]
	for u := range k {
		c := b.target[u] / sh.gp
		k[u] = c / (1 + c)
		fixed[u] = act != nil && act[u] == 0
	}
	for iter := 0; iter <= n; iter++ {
		sumK, rFix := 0.0, 0.0
		for u := range k {
			if fixed[u] {
				if act == nil || act[u] != 0 {
					rFix += g[u] * p[u]
				}
			} else {
				sumK += k[u]
			}
		}
		den := 1 - sh.f1*sumK
		if den <= 0 {
			rp.idealBad++
			for u := range k {
				if !fixed[u] {
					p[u] = b.pmax
				}
			}
			return
		}
		X := (sh.f1*rFix + sh.noiseMW) / den
		changed := false
		for u := range k {
			if fixed[u] {
				continue
			}
			x := k[u] * X / g[u]
			if !(x <= b.pmax) { // also g = 0
				x, fixed[u], changed = b.pmax, true, true
			} else if x < b.pmin {
				x, fixed[u], changed = b.pmin, true, true
			}
			p[u] = x
		}
		if !changed {
			return
		}
	}
}

// matrixSIR computes SIR_i = G_ii p_i / (Σ_{j≠i} G_ij p_j + η_i) (test hook)
// and returns the noise rise at user 0's receiver.
func (rp *replication) matrixSIR(p []float64, act []uint8) float64 {
	G, eta := rp.sh.hk.matrix, rp.sh.hk.eta
	for i := range p {
		I := eta[i]
		for j, x := range p {
			if j != i && (act == nil || act[j] != 0) {
				I += G[i][j] * x
			}
		}
		r := G[i][i] * p[i]
		if act != nil && act[i] == 0 {
			r = 0
		}
		rp.rx[i] = r
		rp.sir[i] = r / I
	}
	tot := eta[0]
	for j, x := range p {
		if act == nil || act[j] != 0 {
			tot += G[0][j] * x
		}
	}
	return tot / eta[0]
}
