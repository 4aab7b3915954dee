package loop

import "math"

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

// endBatch summarises the batch of every user, distance bin and the
// aggregate, folds the batch values into the running sums, merges the
// batch histograms into the cumulative ones and clears them.
func (c *collector) endBatch() {
	sh := c.shared
	n := c.users
	agg := c.sets - 1
	for i := range c.setBatchCounts {
		c.setBatchCounts[i] = 0
	}
	for i := range c.setPowSum {
		c.setPowSum[i] = 0
	}
	if c.fullScan {
		// The fast path did not track the used bins: find them.
		ss, ps := sh.sirLayout.size(), sh.powLayout.size()
		for u := 0; u < n; u++ {
			lo, hi := usedRange(c.sir.batch[u*c.sir.stride : u*c.sir.stride+ss])
			c.sir.lo[u], c.sir.hi[u] = int32(lo), int32(hi)
			lo, hi = usedRange(c.pow.batch[u*c.pow.stride : u*c.pow.stride+ps])
			c.pow.lo[u], c.pow.hi[u] = int32(lo), int32(hi)
		}
		c.fullScan = false
	}
	var hs histStats
	for u := 0; u < n; u++ {
		cnt := c.batchSlots[u]
		if cnt == 0 {
			continue
		}
		bin := sh.users[u].bin
		c.sir.mergeUser(u, bin, agg, cnt, &hs)
		var ps histStats
		c.pow.mergeUser(u, bin, agg, cnt, &ps)
		for q := range 5 {
			c.fold(u, stPowQ+q, ps.q[q])
		}
		c.foldHist(u, &hs, linToDB(c.batchPowSum[u]/float64(cnt)), c.batchOutage[u], c.batchAtMax[u], c.batchBlocks[u], c.batchBlockErrs[u])
		for _, s := range [2]int{bin, agg} {
			sb := c.setBatchCounts[s*5 : s*5+5]
			sb[0] += cnt
			sb[1] += c.batchOutage[u]
			sb[2] += c.batchAtMax[u]
			sb[3] += c.batchBlocks[u]
			sb[4] += c.batchBlockErrs[u]
			c.setPowSum[s] += c.batchPowSum[u]
		}
		c.cumSlots[u] += cnt
		c.cumOutage[u] += c.batchOutage[u]
		c.cumAtMax[u] += c.batchAtMax[u]
		c.cumBlocks[u] += c.batchBlocks[u]
		c.cumBlockErrs[u] += c.batchBlockErrs[u]
		c.cumPowSum[u] += c.batchPowSum[u]
		c.batchSlots[u], c.batchOutage[u], c.batchAtMax[u], c.batchBlocks[u], c.batchBlockErrs[u], c.batchPowSum[u] = 0, 0, 0, 0, 0, 0
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
	if c.riseSlots > 0 {
		scanMerge(sh.riseLayout, c.riseBatch, c.riseCum, nil, nil, c.riseLo, c.riseHi, uint64(c.riseSlots), &hs)
		c.riseLoCum, c.riseHiCum = min(c.riseLoCum, c.riseLo), max(c.riseHiCum, c.riseHi)
		c.riseLo, c.riseHi = math.MaxInt, -1
		c.riseBatchSum[0] += hs.mean
		c.riseBatchSumSq[0] += hs.mean * hs.mean
		c.riseBatchSum[1] += hs.q[3]
		c.riseBatchSumSq[1] += hs.q[3] * hs.q[3]
		c.riseBatches++
		c.riseSlotsCum += c.riseSlots
		c.riseSlots = 0
	}
}

// scanMerge summarises a batch histogram over [lo, hi] (scanStats, the
// one histogram scan), adds every count to cum and to the set histograms
// setA and setB (either may be nil), and clears the batch.
func scanMerge[T uint32 | uint64](l *histLayout, batch, cum []T, setA, setB []uint64, lo, hi int, n uint64, out *histStats) {
	scanStats(l, batch, lo, hi, n, quantileSpec[:], out, func(j int, cj T) {
		batch[j] = 0
		cum[j] += cj
		if setA != nil {
			setA[j] += uint64(cj)
		}
		if setB != nil {
			setB[j] += uint64(cj)
		}
	})
}
