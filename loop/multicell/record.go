package multicell

// The slot loop records what the statistics need and the collector sums it
// up a block later, in the same order as the slots ran: on the helper
// goroutine when there is one (fill.go), so the statistics leave the
// replication's goroutine, which runs the power-control chain itself;
// without a helper at the same point on the replication's goroutine. The
// report is the same either way and the same as summing each slot as it
// runs: the same values are added in the same order.

// Flags of a recorded user-slot (blockRec.flags).
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
}

func newBlockRec(U, C int) *blockRec {
	return &blockRec{
		sir: make([]float64, blockSlots*U), pDB: make([]float64, blockSlots*U), targetDB: make([]float64, blockSlots*U),
		flags: make([]uint8, blockSlots*U), rx: make([]float64, blockSlots*C), own: make([]float64, blockSlots*C),
		best: make([]int32, U), nLegs: make([]int8, U),
	}
}

// start begins the record of the block of n slots from t0, with the
// users' active sets of that block.
func (r *blockRec) start(rp *rep, t0 int64, n int) {
	r.t0, r.n = t0, n
	for u := range rp.users {
		r.best[u] = int32(rp.users[u].best)
		r.nLegs[u] = int8(rp.users[u].nLegs)
	}
}

// addBlock sums up a block's record: per measured slot, every user
// (collector.user, with the block result where one ended), then the cells
// (collector.cells).
func (c *collector) addBlock(rp *rep, r *blockRec) {
	U, C := rp.U, rp.C
	for k := 0; k < r.n; k++ {
		if r.t0+int64(k) < rp.cfg.Run.WarmupSlots {
			continue
		}
		i := k * U
		for u := 0; u < U; u++ {
			f := r.flags[i+u]
			c.user(u, rp.users[u].edge, int(r.nLegs[u]), int(r.best[u]), r.sir[i+u], r.pDB[i+u], r.targetDB[i+u], f)
			if f&recBlockEnd != 0 {
				c.block(f&recBlockErr != 0)
			}
		}
		c.cells(r.rx[k*C:(k+1)*C], r.own[k*C:(k+1)*C], rp.noiseMW)
	}
}
