package multicell

import "unsafe"

// plainArgs is what the assembly loop over users of a plain slot reads
// and returns (plainUsersAsm, loops_amd64.s; offsets in TestLoopLayout).
// A plain slot: closed loop without open loop, no per-leg draws, no block
// end, feedback delay 0.
type plainArgs struct {
	users     *user
	n         int
	su        *userSlot
	pCur      *float64
	cmds      *int8
	recSIR    *float64 // nil: the slot is not measured
	recPDB    *float64
	recTDB    *float64
	recFlags  *uint8
	lin       [2]float64 // downLin, upLin
	lim       [2]float64 // pmin, pmax (mW)
	limDB     [2]float64 // their dBm values as setP computes them
	stepDB    [2]float64 // −step_db, +step_db
	marginLin float64
	pAtMax    float64
	ups       int // out: users whose power went up
	downs     int // out: users whose power went down
	stride    int // bytes from one user to the next (unsafe.Sizeof(user{}))
	pPrev     *float64
}

// plainUsers runs the loop over users of a plain slot k in assembly and
// reports whether it did (else runUsers runs its Go loop, the same bits:
// TestLoopAsmMatchesGo). Every slice it hands over holds U entries.
func (rp *rep) plainUsers(k int, measure bool) (ups, downs int, ok bool) {
	U := rp.U
	if !useLoopAsm || U == 0 || len(rp.users) < U || len(rp.slotU) < U || len(rp.pCur) < U || len(rp.pPrev) < U || len(rp.cmds) < U {
		return 0, 0, false
	}
	il := &rp.cfg.InnerLoop
	lin, lim, limDB := rp.stepTables()
	a := plainArgs{users: &rp.users[0], n: U, su: &rp.slotU[0], pCur: &rp.pCur[0], cmds: &rp.cmds[0],
		lin: lin, lim: lim, limDB: limDB, stepDB: [2]float64{il.StepDB * -1, il.StepDB * 1},
		marginLin: rp.marginLin, pAtMax: rp.pmax * (1 - 1e-12), stride: int(unsafe.Sizeof(user{})), pPrev: &rp.pPrev[0]}
	if measure {
		rec := rp.rec
		if len(rec.sir) < (k+1)*U || len(rec.pDB) < (k+1)*U || len(rec.targetDB) < (k+1)*U || len(rec.flags) < (k+1)*U {
			panic("multicell: block record shorter than its slots") // programmer error
		}
		a.recSIR, a.recPDB, a.recTDB, a.recFlags = &rec.sir[k*U], &rec.pDB[k*U], &rec.targetDB[k*U], &rec.flags[k*U]
	}
	plainUsersFast(&a)
	return a.ups, a.downs, true
}
