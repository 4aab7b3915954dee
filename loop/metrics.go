package loop

import (
	"math"
	"sync"
)

// Statistics of a set of users (one user, a distance bin, all users), per
// batch and over the run.
const (
	stSIRMean = iota // mean SIR error, dB
	stSIRStd         // std of the SIR error, dB
	stSIRQ           // 5 percentiles of the SIR error, dB (stSIRQ..stSIRQ+4)
	stOutage  = stSIRQ + 5
	stBLER    = stOutage + 1
	stPowMean = stBLER + 1 // 10·log10 of the mean linear power, dBm
	stPowQ    = stPowMean + 1
	stMaxFrac = stPowQ + 5
	nStat     = stMaxFrac + 1
)

// collector accumulates the figures of one replication with bounded
// memory: fixed-bin histograms (per user, per distance bin, aggregate) and
// counters; batch statistics are folded into running sums at each batch end.
type collector struct {
	shared *shared
	users  int
	// Histograms of the SIR error ratio and of the Tx power (mW).
	sir, pow quantityHists

	// Per-user counters of the current batch and cumulative: active
	// measured slots, slots in outage, slots at max power, blocks, block
	// errors, and the sum of the linear Tx power (mW).
	batchSlots, batchOutage, batchAtMax, batchBlocks, batchBlockErrs []int64
	batchPowSum                                                      []float64
	cumSlots, cumOutage, cumAtMax, cumBlocks, cumBlockErrs           []int64
	cumPowSum                                                        []float64

	// Sets: one per distance bin, then the aggregate (sets−1).
	sets           int
	setUsers       []int
	setBatchCounts []int64   // per set: slots, outage, at max, blocks, block errors of the batch
	setPowSum      []float64 // per set: Σ Tx power (mW) of the batch

	// Receiver noise rise: histograms, used ranges, slot counts, and the
	// batch sums (and sums of squares) of its (mean, p95) in dB.
	riseBatch, riseCum                   []uint64
	riseLo, riseHi, riseLoCum, riseHiCum int
	riseSlots, riseSlotsCum              int64
	riseBatchSum, riseBatchSumSq         [2]float64
	riseBatches                          int

	// Batch means of every statistic: sums, sums of squares and counts,
	// indexed [set index (users, then sets)·nStat + statistic].
	statSum, statSumSq []float64
	statBatches        []int32
	batchIndex         int   // current batch, 0-based
	batchCount         int   // batches per replication
	nextBatchEnd       int64 // first slot after the current batch
	measuredSlots      int64 // slots after warm-up

	// Convergence: slot at which each user converged (−1 not yet), the
	// moving window of SIR errors in dB per user, its sum, fill and head,
	// and the number of users not yet converged.
	convergedAt                   []int64
	convWindow, convWindowSum     []float64
	convWindowLen, convWindowHead []int32
	unconverged                   int

	fullScan   bool  // some slot of this batch skipped range tracking (fast path)
	fusedSlots int64 // fast-path slots of this batch: one more in every user's batchSlots
	quantiles  []float64

	// The previous batch's accumulators, summarised off the slot loop
	// (endBatch), and the wait for and panic of that summary.
	spare        batchBufs
	pending      sync.WaitGroup
	pendingPanic any
}

// flushFused adds the batch's fast-path slots to every user's count.
func (c *collector) flushFused() {
	if k := c.fusedSlots; k > 0 {
		for u := range c.batchSlots {
			c.batchSlots[u] += k
		}
		c.fusedSlots = 0
	}
}

// quantityHists are the histograms of one quantity (SIR error ratio or Tx
// power): per user the current batch and the cumulative counts (user-major
// rows of stride bins) with the used index range of each, and the same per
// set (distance bins, then the aggregate).
type quantityHists struct {
	layout                           *histLayout
	stride                           int
	batch, cum                       []uint32
	lo, hi, loCum, hiCum             []int32
	setBatch, setCum                 [][]uint64 // nil for sets without users
	setLo, setHi, setLoCum, setHiCum []int
}

// filled is a slice of n copies of v.
func filled[T any](n int, v T) []T {
	s := make([]T, n)
	for i := range s {
		s[i] = v
	}
	return s
}

func newQuantityHists(l *histLayout, users int, setUsers []int) quantityHists {
	q := quantityHists{layout: l, stride: padStride(l.size(), 4)}
	q.batch = make([]uint32, users*q.stride)
	q.cum = make([]uint32, users*q.stride)
	q.lo, q.hi, q.loCum, q.hiCum = filled(users, int32(math.MaxInt32)), filled(users, int32(-1)), filled(users, int32(math.MaxInt32)), filled(users, int32(-1))
	sets := len(setUsers)
	q.setBatch, q.setCum = make([][]uint64, sets), make([][]uint64, sets)
	for i, k := range setUsers {
		if k > 0 {
			q.setBatch[i], q.setCum[i] = make([]uint64, q.stride), make([]uint64, q.stride)
		}
	}
	q.setLo, q.setHi, q.setLoCum, q.setHiCum = filled(sets, math.MaxInt), filled(sets, -1), filled(sets, math.MaxInt), filled(sets, -1)
	return q
}

// mergeUser summarises user u's batch histogram (in batch, used range
// bLo..bHi) into out, adds it to the
// user's cumulative histogram and to its distance bin's and the
// aggregate's batch histograms, and resets the batch range.
func (q *quantityHists) mergeUser(batch []uint32, bLo, bHi []int32, u, bin, agg int, cnt int64, out *histStats) {
	lo, hi := int(bLo[u]), int(bHi[u])
	row := q.stride * u
	scanMerge(q.layout, batch[row:row+q.stride], q.cum[row:row+q.stride], q.setBatch[bin], q.setBatch[agg], lo, hi, uint64(cnt), out)
	for _, s := range [2]int{bin, agg} {
		q.setLo[s], q.setHi[s] = min(q.setLo[s], lo), max(q.setHi[s], hi)
	}
	q.loCum[u], q.hiCum[u] = min(q.loCum[u], bLo[u]), max(q.hiCum[u], bHi[u])
	bLo[u], bHi[u] = math.MaxInt32, -1
}

// mergeSet summarises set s's batch histogram into out, adds it to the
// set's cumulative histogram and resets the batch range.
func (q *quantityHists) mergeSet(s int, cnt int64, out *histStats) {
	lo, hi := q.setLo[s], q.setHi[s]
	scanMerge(q.layout, q.setBatch[s], q.setCum[s], nil, nil, lo, hi, uint64(cnt), out)
	q.setLoCum[s], q.setHiCum[s] = min(q.setLoCum[s], lo), max(q.setHiCum[s], hi)
	q.setLo[s], q.setHi[s] = math.MaxInt, -1
}

func newCollector(sh *shared) *collector {
	n := sh.n
	c := &collector{shared: sh, users: n, quantiles: quantileSpec[:]}
	for _, p := range []*[]int64{&c.batchSlots, &c.batchOutage, &c.batchAtMax, &c.batchBlocks, &c.batchBlockErrs, &c.cumSlots, &c.cumOutage, &c.cumAtMax, &c.cumBlocks, &c.cumBlockErrs} {
		*p = make([]int64, n)
	}
	c.batchPowSum = make([]float64, n)
	c.cumPowSum = make([]float64, n)
	c.sets = sh.nbins + 1
	c.setUsers = make([]int, c.sets)
	for _, u := range sh.users {
		c.setUsers[u.bin]++
		c.setUsers[c.sets-1]++
	}
	c.sir = newQuantityHists(sh.sirLayout, n, c.setUsers)
	c.pow = newQuantityHists(sh.powLayout, n, c.setUsers)
	c.setBatchCounts = make([]int64, c.sets*5)
	c.setPowSum = make([]float64, c.sets)
	c.riseBatch = make([]uint64, sh.riseLayout.size())
	c.riseCum = make([]uint64, sh.riseLayout.size())
	c.riseLo, c.riseHi, c.riseLoCum, c.riseHiCum = math.MaxInt, -1, math.MaxInt, -1
	c.statSum = make([]float64, (n+c.sets)*nStat)
	c.statSumSq = make([]float64, (n+c.sets)*nStat)
	c.statBatches = make([]int32, (n+c.sets)*nStat)
	c.batchCount = sh.batches
	c.measuredSlots = sh.total - sh.warm
	c.nextBatchEnd = sh.warm + c.measuredSlots/int64(c.batchCount)
	if c.nextBatchEnd == sh.warm {
		c.nextBatchEnd = sh.warm + 1
	}
	c.spare = batchBufs{
		sirB: make([]uint32, len(c.sir.batch)), powB: make([]uint32, len(c.pow.batch)),
		sirLo: filled(n, int32(math.MaxInt32)), sirHi: filled(n, int32(-1)),
		powLo: filled(n, int32(math.MaxInt32)), powHi: filled(n, int32(-1)),
		slots: make([]int64, n), outage: make([]int64, n), atMax: make([]int64, n),
		blocks: make([]int64, n), blockErrs: make([]int64, n), powSum: make([]float64, n),
		rise: make([]uint64, len(c.riseBatch)), riseLo: math.MaxInt, riseHi: -1,
	}
	c.convergedAt = make([]int64, n)
	for i := range c.convergedAt {
		c.convergedAt[i] = -1
	}
	w := sh.convW
	c.convWindow = make([]float64, n*w)
	c.convWindowSum = make([]float64, n)
	c.convWindowLen = make([]int32, n)
	c.convWindowHead = make([]int32, n)
	c.unconverged = n
	return c
}

// slotInputs are the per-user slices of a replication that the collector
// reads each slot (the replication owns and updates them; lengths = users).
type slotInputs struct {
	sirLin      []float64 // true SIR of this slot, linear
	invTarget   []float64 // 1 / SIR target, linear
	powerMW     []float64 // transmit power of this slot, mW
	receivedMW  []float64 // received power of this slot, mW (fast path)
	effSIRSum   []float64 // block accumulator of the effective SIR (fast path adds to it)
	effSIRCount []int32   // slots in the block accumulator (slot path; slotFused's caller counts its own)
	maxPowerMW  float64   // max_power_dbm in mW
}

// slot records slot t: the SIRs, powers and targets in in, the noise rise
// nr (linear) and the activity (nil: all on).
func (c *collector) slot(t int64, in *slotInputs, nr float64, act []uint8) {
	sh := c.shared
	n := c.users
	sir := in.sirLin[:n]
	inv := in.invTarget[:n]
	if c.unconverged > 0 {
		c.convergence(t, sir, inv, act)
	}
	if t < sh.warm {
		return
	}
	sl, pl := sh.sirLayout, sh.powLayout
	p := in.powerMW[:n]
	pmax := in.maxPowerMW
	marg := sh.marginLin
	ss, ps := c.sir.stride, c.pow.stride
	sLo, sHi, pLo, pHi := c.sir.lo[:n], c.sir.hi[:n], c.pow.lo[:n], c.pow.hi[:n]
	bOut, bMax, bPsum, bCnt := c.batchOutage[:n], c.batchAtMax[:n], c.batchPowSum[:n], c.batchSlots[:n]
	sB, pB := c.sir.batch, c.pow.batch
	for u, s := range sir {
		if act != nil && act[u] == 0 {
			continue
		}
		ratio := s * inv[u]
		k := sl.index(ratio)
		sB[u*ss+k]++
		k32 := int32(k)
		sLo[u] = min(sLo[u], k32)
		sHi[u] = max(sHi[u], k32)
		if ratio < marg {
			bOut[u]++
		}
		pu := p[u]
		kp := pl.index(pu)
		pB[u*ps+kp]++
		kp32 := int32(kp)
		pLo[u] = min(pLo[u], kp32)
		pHi[u] = max(pHi[u], kp32)
		if pu >= pmax {
			bMax[u]++
		}
		bPsum[u] += pu
		bCnt[u]++
	}
	c.slotTail(t, nr)
}

// slotTail records the slot's noise rise and closes a batch when due.
func (c *collector) slotTail(t int64, nr float64) {
	sh := c.shared
	kn := sh.riseLayout.index(nr)
	c.riseBatch[kn]++
	c.riseLo, c.riseHi = min(c.riseLo, kn), max(c.riseHi, kn)
	c.riseSlots++
	if t+1 >= c.nextBatchEnd {
		c.endBatch()
		c.batchIndex++
		c.nextBatchEnd = sh.warm + c.measuredSlots*int64(c.batchIndex+1)/int64(c.batchCount)
		if c.nextBatchEnd <= t+1 {
			c.nextBatchEnd = t + 2
		}
	}
}

// slotFused is the fast path of a measured slot with every user active,
// converged-tracking done and a linear-mean link: it computes each SIR from
// the received powers (SIR_i = G_p r_i / (X − r_i)), records the figures and
// adds the SIR to the block accumulator in one pass. slotTail completes it.
func (c *collector) slotFused(in *slotInputs, X float64) {
	sh := c.shared
	n := c.users
	rx := in.receivedMW[:n]
	sir := in.sirLin[:n]
	inv := in.invTarget[:n]
	acc := in.effSIRSum[:n]
	sl, pl := sh.sirLayout, sh.powLayout
	p := in.powerMW[:n]
	pmax := in.maxPowerMW
	marg := sh.marginLin
	gp := sh.gp
	ss, ps := c.sir.stride, c.pow.stride
	bOut, bMax, bPsum := c.batchOutage[:n], c.batchAtMax[:n], c.batchPowSum[:n]
	sB, pB := c.sir.batch, c.pow.batch
	// The fast path does not track the used bin range: the batch end scans
	// whole histograms instead (cheaper than two min/max per value). Nor
	// does it count each user's slot: every user has one (fusedSlots, and
	// the caller's count of fused slots in the block accumulator).
	c.fullScan = true
	c.fusedSlots++
	for u, r := range rx {
		s := sirOf(gp, r, X)
		sir[u] = s
		acc[u] += s
	}
	// The outage and at-max counts are added branch-free (conditional
	// moves): both conditions flip at random from slot to slot.
	if sl.shift == fusedShift && pl.shift == fusedShift {
		// The usual resolution: with a constant shift these loops keep
		// everything in registers (a variable shift ties up CX).
		fusedHist(sB, ss, sir, inv, bOut, marg, fusedShift, sl.base1, sl.nb)
		fusedPow(pB, ps, p, bMax, bPsum, pmax, fusedShift, pl.base1, pl.nb)
		return
	}
	fusedHist(sB, ss, sir, inv, bOut, marg, sl.shift, sl.base1, sl.nb)
	fusedPow(pB, ps, p, bMax, bPsum, pmax, pl.shift, pl.base1, pl.nb)
}

// fusedShift is the bin-index shift (52 − m) of the usual histogram
// resolution, m = HistBinsPerOctaveLog2.
const fusedShift = 52 - HistBinsPerOctaveLog2

// fusedHist adds each user's SIR error ratio s·inv to its histogram row
// (stride ss) and counts the ratios below marg in out (slotFused; inlined,
// so a constant shift stays constant).
func fusedHist(sB []uint32, ss int, sir, inv []float64, out []int64, marg float64, shift uint, base1, nb int) {
	inv = inv[:len(sir)]
	for u, s := range sir {
		ratio := s * inv[u]
		sB[u*ss+binIndex(ratio, shift, base1, nb)]++
		var o int64
		if ratio < marg {
			o = 1
		}
		out[u] += o
	}
}

// fusedPow adds each user's Tx power p (mW) to its histogram row (stride
// ps) and to its sum, and counts the powers at pmax in atMax (slotFused).
func fusedPow(pB []uint32, ps int, p []float64, atMax []int64, sum []float64, pmax float64, shift uint, base1, nb int) {
	atMax = atMax[:len(p)]
	sum = sum[:len(p)]
	for u, pu := range p {
		pB[u*ps+binIndex(pu, shift, base1, nb)]++
		var m int64
		if pu >= pmax {
			m = 1
		}
		atMax[u] += m
		sum[u] += pu
	}
}

// convergence tracks, for users not yet converged, the mean SIR error over
// the last convW slots (from the start, warm-up included).
func (c *collector) convergence(t int64, sir, inv []float64, act []uint8) {
	w := c.shared.convW
	sl := c.shared.sirLayout
	tol := c.shared.convTolDB
	for u, s := range sir {
		if c.convergedAt[u] >= 0 || (act != nil && act[u] == 0) {
			continue
		}
		e := sl.centerDB[sl.index(s*inv[u])]
		buf := c.convWindow[u*w : (u+1)*w]
		h := c.convWindowHead[u]
		if c.convWindowLen[u] == int32(w) {
			c.convWindowSum[u] -= buf[h]
		} else {
			c.convWindowLen[u]++
		}
		buf[h] = e
		c.convWindowSum[u] += e
		h++
		if h == int32(w) {
			h = 0
		}
		c.convWindowHead[u] = h
		if c.convWindowLen[u] == int32(w) && math.Abs(c.convWindowSum[u]/float64(w)) <= tol {
			c.convergedAt[u] = t + 1
			c.unconverged--
		}
	}
}

// block records a measured block of user u.
func (c *collector) block(u int, blockErr bool) {
	c.batchBlocks[u]++
	if blockErr {
		c.batchBlockErrs[u]++
	}
}
