package loop

import (
	"math"
)

// fold adds one batch value of statistic st of set i.
func (c *collector) fold(i, st int, x float64) {
	j := i*nStat + st
	c.statSum[j] += x
	c.statSumSq[j] += x * x
	c.statBatches[j]++
}

func (c *collector) foldHist(i int, hs *histStats, powMeanDBm float64, out, max, blk, errs int64) {
	if hs.n == 0 {
		return
	}
	c.fold(i, stSIRMean, hs.mean)
	c.fold(i, stSIRStd, hs.std)
	for q := range 5 {
		c.fold(i, stSIRQ+q, hs.q[q])
	}
	c.fold(i, stOutage, float64(out)/float64(hs.n))
	if blk > 0 {
		c.fold(i, stBLER, float64(errs)/float64(blk))
	}
	c.fold(i, stMaxFrac, float64(max)/float64(hs.n))
	c.fold(i, stPowMean, powMeanDBm)
}

// batchBufs are the per-slot accumulators of one batch: the SIR-error
// and Tx-power histograms (user-major rows) with their used index ranges,
// the per-user counters and the noise-rise histogram. A collector has two:
// the slot loop fills the current one (the collector's own fields) while
// the previous batch is summarised from the spare one off the loop's
// goroutine (see endBatch).
type batchBufs struct {
	sirB, powB                              []uint32
	sirLo, sirHi, powLo, powHi              []int32
	fullScan                                bool
	slots, outage, atMax, blocks, blockErrs []int64
	powSum                                  []float64
	rise                                    []uint64
	riseLo, riseHi                          int
	riseSlots                               int64
}

// swapBatch exchanges the collector's current batch accumulators with the
// spare ones (which must be cleared, i.e. already summarised).
func (c *collector) swapBatch() {
	b := &c.spare
	c.sir.batch, b.sirB = b.sirB, c.sir.batch
	c.pow.batch, b.powB = b.powB, c.pow.batch
	c.sir.lo, b.sirLo = b.sirLo, c.sir.lo
	c.sir.hi, b.sirHi = b.sirHi, c.sir.hi
	c.pow.lo, b.powLo = b.powLo, c.pow.lo
	c.pow.hi, b.powHi = b.powHi, c.pow.hi
	c.fullScan, b.fullScan = b.fullScan, c.fullScan
	c.batchSlots, b.slots = b.slots, c.batchSlots
	c.batchOutage, b.outage = b.outage, c.batchOutage
	c.batchAtMax, b.atMax = b.atMax, c.batchAtMax
	c.batchBlocks, b.blocks = b.blocks, c.batchBlocks
	c.batchBlockErrs, b.blockErrs = b.blockErrs, c.batchBlockErrs
	c.batchPowSum, b.powSum = b.powSum, c.batchPowSum
	c.riseBatch, b.rise = b.rise, c.riseBatch
	c.riseLo, b.riseLo = b.riseLo, c.riseLo
	c.riseHi, b.riseHi = b.riseHi, c.riseHi
	c.riseSlots, b.riseSlots = b.riseSlots, c.riseSlots
}

// endBatch closes the current batch: its accumulators become the spare
// ones and are summarised (closeBatch) on another goroutine while the slot
// loop goes on with the cleared set. Batches are summarised one at a time
// and in order (the next endBatch or result waits for the previous one),
// so every figure is computed in the same order as on one goroutine.
func (c *collector) endBatch() {
	c.waitBatch()
	c.flushFused()
	c.swapBatch()
	c.pending.Add(1)
	go func() {
		defer c.pending.Done()
		defer func() {
			if v := recover(); v != nil {
				c.pendingPanic = v
			}
		}()
		c.closeBatch(&c.spare)
	}()
}

// endBatchNow closes the current batch on the calling goroutine.
func (c *collector) endBatchNow() {
	c.waitBatch()
	c.flushFused()
	c.swapBatch()
	c.closeBatch(&c.spare)
}

// waitBatch waits for the batch being summarised, if any; a panic there
// is raised again here, on the replication's goroutine.
func (c *collector) waitBatch() {
	c.pending.Wait()
	if v := c.pendingPanic; v != nil {
		c.pendingPanic = nil
		panic(v)
	}
}

// closeBatch summarises the batch in b of every user, distance bin and
// the aggregate, folds the batch values into the running sums, merges the
// batch histograms into the cumulative ones and clears b.
func (c *collector) closeBatch(b *batchBufs) {
	sh := c.shared
	n := c.users
	agg := c.sets - 1
	for i := range c.setBatchCounts {
		c.setBatchCounts[i] = 0
	}
	for i := range c.setPowSum {
		c.setPowSum[i] = 0
	}
	if b.fullScan {
		// The fast path did not track the used bins: find them.
		ss, ps := sh.sirLayout.size(), sh.powLayout.size()
		for u := 0; u < n; u++ {
			lo, hi := usedRange(b.sirB[u*c.sir.stride : u*c.sir.stride+ss])
			b.sirLo[u], b.sirHi[u] = int32(lo), int32(hi)
			lo, hi = usedRange(b.powB[u*c.pow.stride : u*c.pow.stride+ps])
			b.powLo[u], b.powHi[u] = int32(lo), int32(hi)
		}
		b.fullScan = false
	}
	var hs histStats
	for u := 0; u < n; u++ {
		cnt := b.slots[u]
		if cnt == 0 {
			continue
		}
		bin := sh.users[u].bin
		c.sir.mergeUser(b.sirB, b.sirLo, b.sirHi, u, bin, agg, cnt, &hs)
		var ps histStats
		c.pow.mergeUser(b.powB, b.powLo, b.powHi, u, bin, agg, cnt, &ps)
		for q := range 5 {
			c.fold(u, stPowQ+q, ps.q[q])
		}
		c.foldHist(u, &hs, linToDB(b.powSum[u]/float64(cnt)), b.outage[u], b.atMax[u], b.blocks[u], b.blockErrs[u])
		for _, s := range [2]int{bin, agg} {
			sb := c.setBatchCounts[s*5 : s*5+5]
			sb[0] += cnt
			sb[1] += b.outage[u]
			sb[2] += b.atMax[u]
			sb[3] += b.blocks[u]
			sb[4] += b.blockErrs[u]
			c.setPowSum[s] += b.powSum[u]
		}
		c.cumSlots[u] += cnt
		c.cumOutage[u] += b.outage[u]
		c.cumAtMax[u] += b.atMax[u]
		c.cumBlocks[u] += b.blocks[u]
		c.cumBlockErrs[u] += b.blockErrs[u]
		c.cumPowSum[u] += b.powSum[u]
		b.slots[u], b.outage[u], b.atMax[u], b.blocks[u], b.blockErrs[u], b.powSum[u] = 0, 0, 0, 0, 0, 0
	}
	for s := 0; s < c.sets; s++ {
		sb := c.setBatchCounts[s*5 : s*5+5]
		if sb[0] == 0 {
			continue
		}
		c.sir.mergeSet(s, sb[0], &hs)
		var ps histStats
		c.pow.mergeSet(s, sb[0], &ps)
		i := n + s
		for q := range 5 {
			c.fold(i, stPowQ+q, ps.q[q])
		}
		c.foldHist(i, &hs, linToDB(c.setPowSum[s]/float64(sb[0])), sb[1], sb[2], sb[3], sb[4])
	}
	if b.riseSlots > 0 {
		scanMerge(sh.riseLayout, b.rise, c.riseCum, nil, nil, b.riseLo, b.riseHi, uint64(b.riseSlots), &hs)
		c.riseLoCum, c.riseHiCum = min(c.riseLoCum, b.riseLo), max(c.riseHiCum, b.riseHi)
		b.riseLo, b.riseHi = math.MaxInt, -1
		c.riseBatchSum[0] += hs.mean
		c.riseBatchSumSq[0] += hs.mean * hs.mean
		c.riseBatchSum[1] += hs.q[3]
		c.riseBatchSumSq[1] += hs.q[3] * hs.q[3]
		c.riseBatches++
		c.riseSlotsCum += b.riseSlots
		b.riseSlots = 0
	}
}

// scanMerge summarises a batch histogram over [lo, hi] (scanStats, the
// one histogram scan), adds every count to cum and to the set histograms
// setA and setB (either may be nil), and clears the batch. The merge is a
// separate pass of plain integer adds (no call per bin): the sums do not
// depend on the order.
func scanMerge[T uint32 | uint64](l *histLayout, batch, cum []T, setA, setB []uint64, lo, hi int, n uint64, out *histStats) {
	scanStats(l, batch, lo, hi, n, quantileSpec[:], out, nil)
	if n == 0 || lo > hi {
		return
	}
	b := batch[lo : hi+1]
	cm := cum[lo : hi+1]
	cm = cm[:len(b)]
	for j, x := range b {
		cm[j] += x
	}
	for _, set := range [2][]uint64{setA, setB} {
		if set != nil {
			st := set[lo : hi+1]
			st = st[:len(b)]
			for j, x := range b {
				st[j] += uint64(x)
			}
		}
	}
	clear(b)
}
