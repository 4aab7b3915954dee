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

// addBlock sums up a block's record: per measured slot, every user
// (users1, with the block results of the slot), then the cells
// (collector.cells).
func (c *collector) addBlock(rp *rep, r *blockRec) {
	U, C := rp.U, rp.C
	measured := 0.0
	for k := 0; k < r.n; k++ {
		if r.t0+int64(k) < rp.cfg.Run.WarmupSlots {
			continue
		}
		c.users1(rp, r, k*U)
		c.cells(r.rx[k*C:(k+1)*C], r.own[k*C:(k+1)*C], rp.noiseMW)
		measured++
	}
	// Replication 0's per-user slot and leg counts (whole numbers: exact
	// in any order).
	if c.users != nil && measured > 0 {
		for u := range c.users {
			c.users[u].slots += measured
			c.users[u].legs += measured * float64(r.nLegs[u])
		}
	}
}

// users1 records one slot's user-slots (the record's entries from i on):
// the slot's sums are formed first (users1Go, or its assembly), then added
// to the batch.
func (c *collector) users1(rp *rep, r *blockRec, i int) {
	U := rp.U
	sir, pDB, tDB, flags := r.sir[i:i+U], r.pDB[i:i+U], r.targetDB[i:i+U], r.flags[i:i+U]
	sirDB := c.sirDB[:U]
	linToDBFloorTo(sirDB, sir, 1e-30)
	var a slotSums
	if !users1Fast(&a, sirDB, tDB, pDB, rp.edge[:U], flags, r.nLegs[:U], c.users) {
		users1Go(&a, sirDB, tDB, pDB, rp.edge[:U], flags, r.nLegs[:U], c.users)
	}
	b := &c.batches[c.cur]
	out, mx, edge, edgeMx, errS, errS2, tx, blocks, blockErrs := a.out, a.mx, a.edge, a.edgeMx, a.errS, a.errS2, a.tx, a.blocks, a.blockErrs
	legN, legOut, legMx := a.legN, a.legOut, a.legMx
	for cell, n := range r.served {
		b.cellServed[cell] += n
	}
	b.userSlots += float64(U)
	b.outage += out
	b.atMax += mx
	b.edgeSlots += edge
	b.edgeAtMax += edgeMx
	for li := range legN {
		b.legSlots[li] += legN[li]
		b.legOutage[li] += legOut[li]
		b.legAtMax[li] += legMx[li]
	}
	b.sirErrDB += errS
	b.sirErrDB2 += errS2
	b.txDBm += tx
	b.blocks += blocks
	b.blockErrs += blockErrs
}

// slotSums is one slot's sums over users (users1Go), laid out for the
// assembly loop (users1Asm; offsets in TestSlotSumsLayout).
type slotSums struct {
	sirDB, tDB, pDB, edges *float64
	flags                  *uint8
	nLegs                  *int8
	users                  *userAcc // nil: no per-user sums
	n                      int
	out, mx, edge, edgeMx  float64
	errS, errS2, tx        float64
	blocks, blockErrs      float64
	legN, legOut, legMx    [LegStates]float64
}

// users1Go sums one slot's users into a (from zero): outage, time at max
// power (overall, at the cell edge and by handover state), SIR error and
// its square (dB), Tx power (dBm), block ends and errors, and with users
// (replication 0) each user's outage and Tx power.
func users1Go(a *slotSums, sirDB, tDB, pDB, edges []float64, flags []uint8, nLegs []int8, users []userAcc) {
	var out, mx, edge, edgeMx, errS, errS2, tx, blocks, blockErrs float64
	var legN, legOut, legMx [LegStates]float64
	n := len(sirDB)
	tDB, pDB, edges, flags, nLegs = tDB[:n], pDB[:n], edges[:n], flags[:n], nLegs[:n]
	for u, sDB := range sirDB {
		// 0/1 values from the flags, without branches.
		f := flags[u]
		o := float64(f & recOutage)
		m := float64((f & recAtMax) >> 1)
		blocks += float64((f & recBlockEnd) >> 2)
		blockErrs += float64((f & recBlockErr) >> 3)
		nl := int(nLegs[u])
		li := min(nl, LegStates) - 1
		e := sDB - tDB[u]
		out += o
		mx += m
		edge += edges[u]
		edgeMx += m * edges[u]
		legN[li]++
		legOut[li] += o
		legMx[li] += m
		errS += e
		errS2 += e * e
		tx += pDB[u]
		if users != nil {
			ua := &users[u]
			ua.outage += o
			ua.txDBm += pDB[u]
		}
	}
	a.out, a.mx, a.edge, a.edgeMx, a.errS, a.errS2, a.tx, a.blocks, a.blockErrs = out, mx, edge, edgeMx, errS, errS2, tx, blocks, blockErrs
	a.legN, a.legOut, a.legMx = legN, legOut, legMx
}
