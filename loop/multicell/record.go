package multicell

// The slot loop records what the statistics need and the collector sums it
// up a block later, in the same order as the slots ran: on the helper
// goroutine when there is one (fill.go), so the statistics leave the
// replication's goroutine, which runs the power-control chain itself;
// without a helper at the same point on the replication's goroutine. The
// report is the same either way and the same as summing each slot as it
// runs: the same values are added in the same order.

// Flags of a recorded user-slot (blockRec.flags; users1 reads them by
// bit position).
const (
	recOutage   uint8 = 1 << iota // combined SIR below target − outage margin
	recAtMax                      // Tx power at its maximum
	recBlockEnd                   // an outer-loop block ended in this slot
	recBlockErr                   // ... with a block error
)

// blockRec is one block's record for the statistics.
type blockRec struct {
	t0       int64     // the block's first slot
	n        int       // slots recorded
	sir      []float64 // [k·U+u]: combined (best-leg) SIR, linear
	pDB      []float64 // [k·U+u]: Tx power, dBm
	targetDB []float64 // [k·U+u]: SIR target, dB
	flags    []uint8   // [k·U+u]: recOutage | recAtMax | recBlockEnd | recBlockErr
	rx       []float64 // [k·C+c]: received power, mW
	own      []float64 // [k·C+c]: own-cell (best-cell) received power, mW
	best     []int32   // per user: the block's best cell (fixed within a block)
	nLegs    []int8    // per user: the block's active-set size
	served   []float64 // per cell: users whose best cell it is in this block
}

func newBlockRec(U, C int) *blockRec {
	return &blockRec{
		sir: make([]float64, blockSlots*U), pDB: make([]float64, blockSlots*U), targetDB: make([]float64, blockSlots*U),
		flags: make([]uint8, blockSlots*U), rx: make([]float64, blockSlots*C), own: make([]float64, blockSlots*C),
		best: make([]int32, U), nLegs: make([]int8, U), served: make([]float64, C),
	}
}

// start begins the record of the block of n slots from t0, with the
// users' active sets of that block.
func (r *blockRec) start(rp *rep, t0 int64, n int) {
	r.t0, r.n = t0, n
	clear(r.served)
	for u := range rp.users {
		r.best[u] = rp.users[u].best
		r.nLegs[u] = int8(rp.users[u].nLegs)
		r.served[r.best[u]]++
	}
}

// addBlock sums up a block's record: per measured slot, every user's
// figures into its per-user block sums (users1), then the cells
// (collector.cells); the user sums go into the batch at the block's end
// and before a batch closes (flushUsers).
func (c *collector) addBlock(rp *rep, r *blockRec) {
	U, C := rp.U, rp.C
	measured := 0.0
	for k := 0; k < r.n; k++ {
		if r.t0+int64(k) < rp.cfg.Run.WarmupSlots {
			continue
		}
		c.users1(rp, r, k*U)
		if c.closesBatch() {
			c.flushUsers(rp, r)
		}
		c.cells(r.rx[k*C:(k+1)*C], r.own[k*C:(k+1)*C], rp.noiseMW)
		measured++
	}
	c.flushUsers(rp, r)
	// Replication 0's per-user slot and leg counts (whole numbers: exact
	// in any order).
	if c.users != nil && measured > 0 {
		for u := range c.users {
			c.users[u].slots += measured
			c.users[u].legs += measured * float64(r.nLegs[u])
		}
	}
}

// users1 adds one slot's user-slots (the record's entries from i on) to
// the per-user block sums (accumUsers: SIR in dB, its error, Tx power and
// the flags as 0/1) and the slot's per-cell served counts to the batch.
func (c *collector) users1(rp *rep, r *blockRec, i int) {
	U := rp.U
	sirDB := c.sirDB[:U]
	linToDBFloorTo(sirDB, r.sir[i:i+U], 1e-30)
	accumUsers(c.ub, sirDB, r.targetDB[i:i+U], r.pDB[i:i+U], r.flags[i:i+U])
	c.ubSlots++
	b := &c.batches[c.cur]
	for cell, n := range r.served {
		b.cellServed[cell] += n
	}
	b.userSlots += float64(U)
}

// Per-user block sums (collector.ub): users in groups of four, each group
// ubFields arrays of four (the AVX2 loop's layout): user u's field f at
// ub[(u/4)·ubGroup + f·4 + u%4].
const (
	ubOutage   = iota // slots in outage
	ubAtMax           // slots at max power
	ubErr             // Σ SIR error, dB
	ubErr2            // Σ SIR error², dB²
	ubTx              // Σ Tx power, dBm
	ubBlocks          // block ends
	ubBlockErr        // block errors
	ubFields
	ubGroup = 4 * ubFields
)

// ubLen is the length of the per-user block sums of U users.
func ubLen(U int) int { return (U + 3) / 4 * ubGroup }

// accumUsersGo adds one slot's users to the per-user block sums ub: per
// user u, the flags as 0/1 (outage, at max, block end, block error), the
// SIR error e = sirDB − tDB, e², and pDB; one addition per field and user
// (e² a multiplication, then the addition), in user order. accumUsers
// runs it in AVX2 where it can (the same operations per element, so the
// same bits).
func accumUsersGo(ub, sirDB, tDB, pDB []float64, flags []uint8) {
	n := len(sirDB)
	tDB, pDB, flags = tDB[:n], pDB[:n], flags[:n]
	for u, s := range sirDB {
		a := ub[u/4*ubGroup+u%4:]
		f := flags[u]
		e := s - tDB[u]
		a[4*ubOutage] += float64(f & recOutage)
		a[4*ubAtMax] += float64((f & recAtMax) >> 1)
		a[4*ubErr] += e
		a[4*ubErr2] += e * e
		a[4*ubTx] += pDB[u]
		a[4*ubBlocks] += float64((f & recBlockEnd) >> 2)
		a[4*ubBlockErr] += float64((f & recBlockErr) >> 3)
	}
}

// accumUsers is accumUsersGo, in AVX2 for the whole groups of four users
// where it can and in Go for the rest (the same bits).
func accumUsers(ub, sirDB, tDB, pDB []float64, flags []uint8) {
	n := len(sirDB)
	if len(tDB) < n || len(pDB) < n || len(flags) < n || len(ub) < ubLen(n) {
		panic("multicell: accumUsers: arrays shorter than the users") // programmer error
	}
	done := accumUsersFast(ub, sirDB, tDB, pDB, flags)
	accumUsersGo(ub[done/4*ubGroup:], sirDB[done:], tDB[done:], pDB[done:], flags[done:])
}

// flushUsers adds the per-user block sums of the c.ubSlots slots since the
// last flush to the current batch, per user in order (the handover state
// and cell edge of the block's record r: fixed within a block), and to
// replication 0's per-user sums, then clears them.
func (c *collector) flushUsers(rp *rep, r *blockRec) {
	if c.ubSlots == 0 {
		return
	}
	n := float64(c.ubSlots)
	b := &c.batches[c.cur]
	edges := rp.edge[:rp.U]
	for u, edge := range edges {
		a := c.ub[u/4*ubGroup+u%4:]
		o, m := a[4*ubOutage], a[4*ubAtMax]
		li := min(int(r.nLegs[u]), LegStates) - 1
		b.outage += o
		b.atMax += m
		b.edgeSlots += edge * n
		b.edgeAtMax += edge * m
		b.legSlots[li] += n
		b.legOutage[li] += o
		b.legAtMax[li] += m
		b.sirErrDB += a[4*ubErr]
		b.sirErrDB2 += a[4*ubErr2]
		b.txDBm += a[4*ubTx]
		b.blocks += a[4*ubBlocks]
		b.blockErrs += a[4*ubBlockErr]
		if c.users != nil {
			ua := &c.users[u]
			ua.outage += o
			ua.txDBm += a[4*ubTx]
		}
	}
	clear(c.ub)
	c.ubSlots = 0
}
