package multicell

// legList is the slot loop's flat view of every active-set leg, in user
// order and, within a user, in ascending leg slot (the order of user.act):
// the loops over legs run over it without a branch per user on its leg
// count. It is rebuilt (buildLegs) before the first slot after any user's
// legs or their slow gains change (refreshLegs marks it dirty).
type legList struct {
	dirty bool
	j     []int32   // leg slot index u·max_active + l (fade column, rep.legAcc)
	u     []int32   // user
	c     []int32   // cell
	pos   []int32   // u·max_active + k, k the leg's rank in user.act (rep.legSIR)
	g     []float64 // slow gain of the cell (user.leg[l].g)
	own   []float64 // 1 when the cell is the user's best cell, else 0 (adds to rep.own)
}

// newLegList returns a dirty list with room for n legs (U·max_active:
// buildLegs never allocates).
func newLegList(n int) legList {
	return legList{dirty: true, j: make([]int32, 0, n), u: make([]int32, 0, n), c: make([]int32, 0, n),
		pos: make([]int32, 0, n), g: make([]float64, 0, n), own: make([]float64, 0, n)}
}

// buildLegs rebuilds rep.legs from the users' active sets.
func (rp *rep) buildLegs() {
	L := &rp.legs
	ma := rp.cfg.Handover.MaxActive
	L.j, L.u, L.c, L.pos, L.g, L.own = L.j[:0], L.u[:0], L.c[:0], L.pos[:0], L.g[:0], L.own[:0]
	for u := range rp.users {
		us := &rp.users[u]
		for k, l := range us.act[:us.nLegs] {
			lg := &us.leg[l]
			own := 0.0
			if lg.c == us.best {
				own = 1
			}
			L.j = append(L.j, int32(u*ma+int(l)))
			L.u = append(L.u, int32(u))
			L.c = append(L.c, lg.c)
			L.pos = append(L.pos, int32(u*ma+k))
			L.g = append(L.g, lg.g)
			L.own = append(L.own, own)
		}
	}
	L.dirty = false
}

// legCorrections adds to corr, per cell, every active-set leg's fading
// correction p·G·(F − 1), with p[u] the user's power and f the slot's leg
// gains (f[u·max_active + l]), in user and leg order.
func (rp *rep) legCorrections(corr, p, f []float64) {
	L := &rp.legs
	lu, lc, lg := L.u, L.c[:len(L.u)], L.g[:len(L.u)]
	lj := L.j[:len(L.u)]
	for i, u := range lu {
		corr[lc[i]] += p[u] * lg[i] * (f[lj[i]] - 1)
	}
}
