package multicell

// legList is the slot loop's flat view of every active-set leg, in user
// order and, within a user, in ascending leg slot (the order of user.act):
// the loops over legs run over it without a branch per user on its leg
// count. It is rebuilt (buildLegs) before the first slot after any user's
// legs change (refreshLegs marks it dirty); when only the slow gains
// change, afterGains updates them in the list.
type legList struct {
	dirty bool
	e     []legEntry
	// The largest leg slot, user and cell in e (legSIRs checks them
	// against its arrays before the assembly loop).
	maxJ, maxU, maxC int32
}

// legEntry is one active-set leg as the slot loop reads it (one array of
// these rather than one per field: fewer live pointers in the loop).
type legEntry struct {
	g   float64 // slow gain of the cell (user.leg[l].g)
	own float64 // 1 when the cell is the user's best cell, else 0 (adds to rep.own)
	j   int32   // leg slot index u·max_active + l (fade column, rep.legAcc)
	u   int32   // user
	c   int32   // cell
	pos int32   // u·max_active + k, k the leg's rank in user.act (rep.legSIR)
}

// userSlot is what the loop over legs reads and sets per user in a slot.
type userSlot struct {
	p    float64 // power this slot, mW (user.p)
	tgt  float64 // SIR target, linear (user.target)
	best float64 // best leg SIR so far
	up   uint8   // 1 while every leg's SIR is below target
}

// newLegList returns a dirty list with room for n legs (U·max_active:
// buildLegs never allocates).
func newLegList(n int) legList {
	return legList{dirty: true, e: make([]legEntry, 0, n)}
}

// add appends e to the list and keeps its largest indices.
func (L *legList) add(e legEntry) {
	L.e = append(L.e, e)
	L.maxJ, L.maxU, L.maxC = max(L.maxJ, e.j), max(L.maxU, e.u), max(L.maxC, e.c)
}

// buildLegs rebuilds rep.legs from the users' active sets.
func (rp *rep) buildLegs() {
	L := &rp.legs
	ma := rp.cfg.Handover.MaxActive
	L.e = L.e[:0]
	L.maxJ, L.maxU, L.maxC = 0, 0, 0
	for u := range rp.users {
		us := &rp.users[u]
		for k, l := range us.act[:us.nLegs] {
			lg := &us.leg[l]
			own := 0.0
			if lg.c == us.best {
				own = 1
			}
			L.add(legEntry{g: lg.g, own: own, j: int32(u*ma + int(l)), u: int32(u), c: lg.c, pos: int32(u*ma + k)})
		}
	}
	L.dirty = false
}

// legSIRs runs the slot's SIR of every active-set leg: the received
// signal p·G·F, the own-cell power of each user's best cell (own), the
// SIR W/R·S/(rx − S) (at least the noise below), the block accumulators
// (legAcc, legN), and per user the best SIR and whether every leg's SIR is
// below target (rep.slotU, set by runUsers before). With draws per leg
// (plain false) it also keeps each SIR by rank (legSIR). fk is the slot's
// leg gains by leg slot (legGains). Plain slots run the assembly loop
// where there is one (loops_amd64.s, the same bits), after checking
// that every index of the list is inside its array.
func (rp *rep) legSIRs(fk []float64, plain bool) {
	es := rp.legs.e
	if plain && useLoopAsm && len(es) > 0 {
		nl, nu := len(rp.legAcc), len(rp.slotU)
		if len(fk) < nl || len(rp.legN) < nl || len(rp.own) < rp.C || len(rp.rx) < rp.C || int(rp.legs.maxJ) >= nl || int(rp.legs.maxU) >= nu || int(rp.legs.maxC) >= rp.C {
			panic("multicell: leg list out of its arrays") // programmer error
		}
		legSIRsFast(es, fk, rp.slotU, rp.own, rp.rx, rp.legAcc, rp.legN, rp.pg, rp.noiseMW)
		return
	}
	rp.legSIRsGo(fk, plain)
}

// useLoopAsm selects the assembly loops where there are (legSIRs,
// plainUsers; tests switch it off to compare).
var useLoopAsm = haveLoopAsm

// legSIRsGo is legSIRs in Go: the reference of the assembly loop and the
// loop of slots with draws per leg.
func (rp *rep) legSIRsGo(fk []float64, plain bool) {
	own, rx, acc, cnt, legSIR, su := rp.own, rp.rx, rp.legAcc, rp.legN, rp.legSIR, rp.slotU
	pg, noise := rp.pg, rp.noiseMW
	es := rp.legs.e
	fk = fk[:len(legSIR)]
	for i := range es {
		e := &es[i]
		f := fk[e.j]
		s := &su[e.u]
		c, j := e.c, e.j
		sig := s.p * e.g * f
		own[c] += sig * e.own // adding 0 changes nothing
		sir := pg * sig / max(rx[c]-sig, noise)
		acc[j] += sir
		cnt[j]++
		s.best = max(s.best, sir)
		var up uint8
		if sir < s.tgt {
			up = 1
		}
		s.up &= up
		if !plain {
			legSIR[e.pos] = sir
		}
	}
}

// legGains returns slot k's fast-fading power gain of every leg by leg
// slot u·max_active + l: the fade set's row (SLOW_TOWARD_OTHERS), the
// links' samples gathered into rep.legF (FULL), or rep.legF's ones (NONE).
func (rp *rep) legGains(k int) []float64 {
	if rp.fade != nil {
		return rp.fade[k*rp.fadeStride : (k+1)*rp.fadeStride]
	}
	if rp.full {
		for _, e := range rp.legs.e {
			rp.legF[e.j] = rp.fullBuf[int(e.c)*rp.U+int(e.u)][k]
		}
	}
	return rp.legF
}

// legCorrections adds to corr, per cell, every active-set leg's fading
// correction p·G·(F − 1), with p[u] the user's power and f the slot's leg
// gains (f[u·max_active + l]), in user and leg order: in assembly where
// there is (loops_amd64.s, the same bits), after checking every index of
// the list against the arrays.
func (rp *rep) legCorrections(corr, p, f []float64) {
	L := &rp.legs
	if useLoopAsm && len(L.e) > 0 {
		if int(L.maxC) >= len(corr) || int(L.maxU) >= len(p) || int(L.maxJ) >= len(f) {
			panic("multicell: leg list out of its arrays") // programmer error
		}
		legCorrectionsFast(L.e, corr, p, f)
		return
	}
	legCorrectionsGo(L.e, corr, p, f)
}

// legCorrectionsGo is legCorrections in Go (the assembly loop's reference).
func legCorrectionsGo(es []legEntry, corr, p, f []float64) {
	for _, e := range es {
		corr[e.c] += p[e.u] * e.g * (f[e.j] - 1)
	}
}
