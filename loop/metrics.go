package loop

import (
	"math"
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
	sh     *shared
	n      int
	ss, ps int

	sB, sC                 []uint32 // per-user SIR-error histograms: current batch, cumulative
	pB, pC                 []uint32 // per-user Tx-power histograms
	sLo, sHi, pLo, pHi     []int32
	sLoC, sHiC, pLoC, pHiC []int32

	bCnt, bOut, bMax, bBlk, bErr []int64 // per-user batch counters
	bPsum                        []float64
	cCnt, cOut, cMax, cBlk, cErr []int64 // per-user cumulative counters
	cPsum                        []float64

	nsets                              int // nbins + 1 (the last is the aggregate)
	setSB, setSC, setPB, setPC         [][]uint64
	setSLo, setSHi, setPLo, setPHi     []int
	setSLoC, setSHiC, setPLoC, setPHiC []int
	setUsers                           []int

	nrB, nrC         []uint64
	nrLo, nrHi       int
	nrLoC, nrHiC     int
	nrCnt, nrCntC    int64
	nrSum, nrSq      [2]float64 // batch sums of (mean, p95)
	nrK              int
	bsum, bsq        []float64 // per set index (users, then sets) × nStat
	bk               []int32
	batch, batches   int
	nextEnd          int64
	measured         int64
	setBatch         []int64 // per set: batch counters scratch (cnt, out, max, blk, err) × 5
	setPsum          []float64
	conv             []int64
	win              []float64
	winSum           []float64
	winN, winHead    []int32
	pending          int
	overflowSIR      int64
	scratch          histStats
	fullScan         bool // some slot of this batch skipped range tracking
	quantiles        []float64
	anyActiveLimited bool
}

func newCollector(sh *shared) *collector {
	n := sh.n
	c := &collector{sh: sh, n: n, ss: padStride(sh.sl.size(), 4), ps: padStride(sh.pl.size(), 4), quantiles: quantileSpec[:]}
	c.sB = make([]uint32, n*c.ss)
	c.sC = make([]uint32, n*c.ss)
	c.pB = make([]uint32, n*c.ps)
	c.pC = make([]uint32, n*c.ps)
	mk32 := func(v int32) []int32 {
		s := make([]int32, n)
		for i := range s {
			s[i] = v
		}
		return s
	}
	c.sLo, c.sHi, c.pLo, c.pHi = mk32(math.MaxInt32), mk32(-1), mk32(math.MaxInt32), mk32(-1)
	c.sLoC, c.sHiC, c.pLoC, c.pHiC = mk32(math.MaxInt32), mk32(-1), mk32(math.MaxInt32), mk32(-1)
	for _, p := range []*[]int64{&c.bCnt, &c.bOut, &c.bMax, &c.bBlk, &c.bErr, &c.cCnt, &c.cOut, &c.cMax, &c.cBlk, &c.cErr} {
		*p = make([]int64, n)
	}
	c.bPsum = make([]float64, n)
	c.cPsum = make([]float64, n)
	c.nsets = sh.nbins + 1
	c.setUsers = make([]int, c.nsets)
	for _, u := range sh.users {
		c.setUsers[u.bin]++
		c.setUsers[c.nsets-1]++
	}
	// Set histograms only for sets with users (empty distance bins get none).
	mkSet := func(size int) [][]uint64 {
		s := make([][]uint64, c.nsets)
		for i := range s {
			if c.setUsers[i] > 0 {
				s[i] = make([]uint64, size)
			}
		}
		return s
	}
	c.setSB, c.setSC, c.setPB, c.setPC = mkSet(c.ss), mkSet(c.ss), mkSet(c.ps), mkSet(c.ps)
	mkI := func(v int) []int {
		s := make([]int, c.nsets)
		for i := range s {
			s[i] = v
		}
		return s
	}
	c.setSLo, c.setSHi, c.setPLo, c.setPHi = mkI(math.MaxInt), mkI(-1), mkI(math.MaxInt), mkI(-1)
	c.setSLoC, c.setSHiC, c.setPLoC, c.setPHiC = mkI(math.MaxInt), mkI(-1), mkI(math.MaxInt), mkI(-1)
	c.setBatch = make([]int64, c.nsets*5)
	c.setPsum = make([]float64, c.nsets)
	c.nrB = make([]uint64, sh.nl.size())
	c.nrC = make([]uint64, sh.nl.size())
	c.nrLo, c.nrHi, c.nrLoC, c.nrHiC = math.MaxInt, -1, math.MaxInt, -1
	c.bsum = make([]float64, (n+c.nsets)*nStat)
	c.bsq = make([]float64, (n+c.nsets)*nStat)
	c.bk = make([]int32, (n+c.nsets)*nStat)
	c.batches = sh.sc.Run.Batches
	c.measured = sh.total - sh.warm
	c.nextEnd = sh.warm + c.measured/int64(c.batches)
	if c.nextEnd == sh.warm {
		c.nextEnd = sh.warm + 1
	}
	c.conv = make([]int64, n)
	for i := range c.conv {
		c.conv[i] = -1
	}
	w := sh.convW
	c.win = make([]float64, n*w)
	c.winSum = make([]float64, n)
	c.winN = make([]int32, n)
	c.winHead = make([]int32, n)
	c.pending = n
	return c
}

// slot records slot t of the replication: the SIRs, powers and targets of
// rp, the noise rise nr (linear) and the activity (nil: all on).
func (c *collector) slot(t int64, rp *replication, nr float64, act []uint8) {
	sh := c.sh
	n := c.n
	sir := rp.sir[:n]
	inv := rp.bank.invTarget[:n]
	if c.pending > 0 {
		c.convergence(t, sir, inv, act)
	}
	if t < sh.warm {
		return
	}
	sl, pl := sh.sl, sh.pl
	p := rp.bank.p[:n]
	pmax := rp.bank.pmax
	marg := sh.marginLin
	ss, ps := c.ss, c.ps
	sLo, sHi, pLo, pHi := c.sLo[:n], c.sHi[:n], c.pLo[:n], c.pHi[:n]
	bOut, bMax, bPsum, bCnt := c.bOut[:n], c.bMax[:n], c.bPsum[:n], c.bCnt[:n]
	sB, pB := c.sB, c.pB
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
	sh := c.sh
	kn := sh.nl.index(nr)
	c.nrB[kn]++
	c.nrLo, c.nrHi = min(c.nrLo, kn), max(c.nrHi, kn)
	c.nrCnt++
	if t+1 >= c.nextEnd {
		c.endBatch()
		c.batch++
		c.nextEnd = sh.warm + c.measured*int64(c.batch+1)/int64(c.batches)
		if c.nextEnd <= t+1 {
			c.nextEnd = t + 2
		}
	}
}

// slotFused is the fast path of a measured slot with every user active,
// converged-tracking done and a linear-mean link: it computes each SIR from
// the received powers (SIR_i = G_p r_i / (X − r_i)), records the figures and
// adds the SIR to the block accumulator in one pass. slotTail completes it.
func (c *collector) slotFused(rp *replication, X float64) {
	sh := c.sh
	n := c.n
	rx := rp.rx[:n]
	sir := rp.sir[:n]
	inv := rp.bank.invTarget[:n]
	acc, cnt := rp.effAcc[:n], rp.effN[:n]
	sl, pl := sh.sl, sh.pl
	p := rp.bank.p[:n]
	pmax := rp.bank.pmax
	marg := sh.marginLin
	gp := sh.gp
	ss, ps := c.ss, c.ps
	bOut, bMax, bPsum, bCnt := c.bOut[:n], c.bMax[:n], c.bPsum[:n], c.bCnt[:n]
	sB, pB := c.sB, c.pB
	// The fast path does not track the used bin range: the batch end scans
	// whole histograms instead (cheaper than two min/max per value).
	c.fullScan = true
	for u, r := range rx {
		s := gp * r / (X - r)
		sir[u] = s
		acc[u] += s
	}
	for u, s := range sir {
		ratio := s * inv[u]
		k := sl.index(ratio)
		sB[u*ss+k]++
		if ratio < marg {
			bOut[u]++
		}
	}
	for u, pu := range p {
		pB[u*ps+pl.index(pu)]++
		if pu >= pmax {
			bMax[u]++
		}
		bPsum[u] += pu
		bCnt[u]++
		cnt[u]++
	}
}

// convergence tracks, for users not yet converged, the mean SIR error over
// the last convW slots (from the start, warm-up included).
func (c *collector) convergence(t int64, sir, inv []float64, act []uint8) {
	w := c.sh.convW
	sl := c.sh.sl
	tol := c.sh.convTolDB
	for u, s := range sir {
		if c.conv[u] >= 0 || (act != nil && act[u] == 0) {
			continue
		}
		e := sl.centerDB[sl.index(s*inv[u])]
		buf := c.win[u*w : (u+1)*w]
		h := c.winHead[u]
		if c.winN[u] == int32(w) {
			c.winSum[u] -= buf[h]
		} else {
			c.winN[u]++
		}
		buf[h] = e
		c.winSum[u] += e
		h++
		if h == int32(w) {
			h = 0
		}
		c.winHead[u] = h
		if c.winN[u] == int32(w) && math.Abs(c.winSum[u]/float64(w)) <= tol {
			c.conv[u] = t + 1
			c.pending--
		}
	}
}

// block records a measured block of user u.
func (c *collector) block(u int, blockErr bool) {
	c.bBlk[u]++
	if blockErr {
		c.bErr[u]++
	}
}

// fold adds one batch value of statistic st of set i.
func (c *collector) fold(i, st int, x float64) {
	j := i*nStat + st
	c.bsum[j] += x
	c.bsq[j] += x * x
	c.bk[j]++
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
	sh := c.sh
	n := c.n
	agg := c.nsets - 1
	for i := range c.setBatch {
		c.setBatch[i] = 0
	}
	for i := range c.setPsum {
		c.setPsum[i] = 0
	}
	if c.fullScan {
		for u := 0; u < n; u++ {
			c.sLo[u], c.sHi[u] = 0, int32(sh.sl.size()-1)
			c.pLo[u], c.pHi[u] = 0, int32(sh.pl.size()-1)
		}
		c.fullScan = false
	}
	var hs histStats
	for u := 0; u < n; u++ {
		cnt := c.bCnt[u]
		if cnt == 0 {
			continue
		}
		bin := sh.users[u].bin
		lo, hi := int(c.sLo[u]), int(c.sHi[u])
		scanMerge(sh.sl, c.sB[u*c.ss:(u+1)*c.ss], c.sC[u*c.ss:(u+1)*c.ss], c.setSB[bin], c.setSB[agg], lo, hi, uint64(cnt), &hs)
		c.setSLo[bin], c.setSHi[bin] = min(c.setSLo[bin], lo), max(c.setSHi[bin], hi)
		c.setSLo[agg], c.setSHi[agg] = min(c.setSLo[agg], lo), max(c.setSHi[agg], hi)
		c.sLoC[u], c.sHiC[u] = min(c.sLoC[u], c.sLo[u]), max(c.sHiC[u], c.sHi[u])
		c.sLo[u], c.sHi[u] = math.MaxInt32, -1
		var ps histStats
		plo, phi := int(c.pLo[u]), int(c.pHi[u])
		scanMerge(sh.pl, c.pB[u*c.ps:(u+1)*c.ps], c.pC[u*c.ps:(u+1)*c.ps], c.setPB[bin], c.setPB[agg], plo, phi, uint64(cnt), &ps)
		c.setPLo[bin], c.setPHi[bin] = min(c.setPLo[bin], plo), max(c.setPHi[bin], phi)
		c.setPLo[agg], c.setPHi[agg] = min(c.setPLo[agg], plo), max(c.setPHi[agg], phi)
		c.pLoC[u], c.pHiC[u] = min(c.pLoC[u], c.pLo[u]), max(c.pHiC[u], c.pHi[u])
		c.pLo[u], c.pHi[u] = math.MaxInt32, -1
		for q := range 5 {
			c.fold(u, stPowQ+q, ps.q[q])
		}
		c.foldHist(u, &hs, linToDB(c.bPsum[u]/float64(cnt)), c.bOut[u], c.bMax[u], c.bBlk[u], c.bErr[u])
		for _, s := range [2]int{bin, agg} {
			sb := c.setBatch[s*5 : s*5+5]
			sb[0] += cnt
			sb[1] += c.bOut[u]
			sb[2] += c.bMax[u]
			sb[3] += c.bBlk[u]
			sb[4] += c.bErr[u]
			c.setPsum[s] += c.bPsum[u]
		}
		c.cCnt[u] += cnt
		c.cOut[u] += c.bOut[u]
		c.cMax[u] += c.bMax[u]
		c.cBlk[u] += c.bBlk[u]
		c.cErr[u] += c.bErr[u]
		c.cPsum[u] += c.bPsum[u]
		c.bCnt[u], c.bOut[u], c.bMax[u], c.bBlk[u], c.bErr[u], c.bPsum[u] = 0, 0, 0, 0, 0, 0
	}
	for s := 0; s < c.nsets; s++ {
		sb := c.setBatch[s*5 : s*5+5]
		if sb[0] == 0 {
			continue
		}
		lo, hi := c.setSLo[s], c.setSHi[s]
		scanMerge64(sh.sl, c.setSB[s], c.setSC[s], lo, hi, uint64(sb[0]), &hs)
		c.setSLoC[s], c.setSHiC[s] = min(c.setSLoC[s], lo), max(c.setSHiC[s], hi)
		c.setSLo[s], c.setSHi[s] = math.MaxInt, -1
		var ps histStats
		plo, phi := c.setPLo[s], c.setPHi[s]
		scanMerge64(sh.pl, c.setPB[s], c.setPC[s], plo, phi, uint64(sb[0]), &ps)
		c.setPLoC[s], c.setPHiC[s] = min(c.setPLoC[s], plo), max(c.setPHiC[s], phi)
		c.setPLo[s], c.setPHi[s] = math.MaxInt, -1
		i := n + s
		for q := range 5 {
			c.fold(i, stPowQ+q, ps.q[q])
		}
		c.foldHist(i, &hs, linToDB(c.setPsum[s]/float64(sb[0])), sb[1], sb[2], sb[3], sb[4])
	}
	if c.nrCnt > 0 {
		scanMerge64(sh.nl, c.nrB, c.nrC, c.nrLo, c.nrHi, uint64(c.nrCnt), &hs)
		c.nrLoC, c.nrHiC = min(c.nrLoC, c.nrLo), max(c.nrHiC, c.nrHi)
		c.nrLo, c.nrHi = math.MaxInt, -1
		c.nrSum[0] += hs.mean
		c.nrSq[0] += hs.mean * hs.mean
		c.nrSum[1] += hs.q[3]
		c.nrSq[1] += hs.q[3] * hs.q[3]
		c.nrK++
		c.nrCntC += c.nrCnt
		c.nrCnt = 0
	}
}

// scanMerge summarises a per-user batch histogram over [lo, hi], adds it to
// the user's cumulative histogram and to two set histograms, and clears it.
func scanMerge(l *histLayout, batch, cum []uint32, setA, setB []uint64, lo, hi int, n uint64, out *histStats) {
	*out = histStats{n: n}
	if n == 0 || lo > hi {
		return
	}
	var ranks [5]float64
	for i, q := range quantileSpec {
		ranks[i] = q * float64(n)
	}
	qi := 0
	var cumN uint64
	var s1, s2 float64
	ref := math.NaN() // shift for a stable variance: the first used bin
	batch, cum = batch[:hi+1], cum[:hi+1]
	setA, setB = setA[:hi+1], setB[:hi+1]
	for j := lo; j <= hi; j++ {
		cj := batch[j]
		if cj == 0 {
			continue
		}
		batch[j] = 0
		cum[j] += cj
		setA[j] += uint64(cj)
		setB[j] += uint64(cj)
		prev := cumN
		cumN += uint64(cj)
		f := float64(cj)
		if prev == 0 {
			ref = l.centerDB[j]
		}
		x := l.centerDB[j] - ref
		s1 += f * x
		s2 += f * x * x
		for qi < 5 && float64(cumN) >= ranks[qi] {
			a, b := l.binEdges(j)
			out.q[qi] = a + (b-a)*(ranks[qi]-float64(prev))/f
			qi++
		}
	}
	finishStats(l, hi, n, s1, s2, ref, qi, out)
}

// scanMerge64 summarises a set batch histogram, adds it to the set's
// cumulative histogram and clears it.
func scanMerge64(l *histLayout, batch, cum []uint64, lo, hi int, n uint64, out *histStats) {
	scanStats(l, batch, lo, hi, n, quantileSpec[:], out, func(j int, c uint64) {
		cum[j] += c
		batch[j] = 0
	})
}

func finishStats(l *histLayout, hi int, n uint64, s1, s2, ref float64, qi int, out *histStats) {
	for ; qi < 5; qi++ {
		_, b := l.binEdges(hi)
		out.q[qi] = b
	}
	fn := float64(n)
	m := s1 / fn
	out.mean = m + ref
	v := s2/fn - m*m
	if v < 0 {
		v = 0
	}
	out.std = math.Sqrt(v)
}

// setResult is a set's figures from one replication: the point estimate of
// each statistic over the run, the standard error from batch means and its
// degrees of freedom (K−1 batches), and the sample sizes.
type setResult struct {
	users  int
	slots  int64
	blocks int64
	val    [nStat]float64
	se     [nStat]float64
	dof    [nStat]int
	ok     [nStat]bool
	conv   float64 // mean convergence time over the set's users, s
}

// repResult is one replication's figures.
type repResult struct {
	sets      []setResult // users, then distance bins, then the aggregate
	nrMean    float64
	nrP95     float64
	nrSE      [2]float64
	nrDof     int
	conv      []float64 // per user, s (censored at the run length)
	converged []bool
	targetDB  []float64 // final targets
	idealBad  int64
	underOver int64 // SIR-error samples outside the histogram range
	traces    []UserTrace
	traceCut  bool
}

func (c *collector) setValues(i int, hsS, hsP *histStats, cnt, out, mx, blk, errs int64, psum float64) setResult {
	r := setResult{slots: cnt, blocks: blk}
	if cnt > 0 {
		r.val[stSIRMean], r.val[stSIRStd] = hsS.mean, hsS.std
		for q := range 5 {
			r.val[stSIRQ+q] = hsS.q[q]
			r.val[stPowQ+q] = hsP.q[q]
		}
		r.val[stOutage] = float64(out) / float64(cnt)
		r.val[stMaxFrac] = float64(mx) / float64(cnt)
		r.val[stPowMean] = linToDB(psum / float64(cnt))
		if blk > 0 {
			r.val[stBLER] = float64(errs) / float64(blk)
		}
	}
	for st := 0; st < nStat; st++ {
		j := i*nStat + st
		k := int(c.bk[j])
		if k == 0 {
			continue
		}
		r.ok[st] = true
		if k > 1 {
			m := c.bsum[j] / float64(k)
			v := (c.bsq[j] - float64(k)*m*m) / float64(k-1)
			r.se[st] = math.Sqrt(math.Max(v, 0) / float64(k))
			r.dof[st] = k - 1
		}
	}
	if cnt == 0 {
		r.ok = [nStat]bool{}
	}
	if blk == 0 {
		r.ok[stBLER] = false
	}
	return r
}

// result finishes the replication (a last partial batch is folded in).
func (c *collector) result(rp *replication) *repResult {
	if c.nrCnt > 0 || anyPositive(c.bCnt) {
		c.endBatch()
	}
	sh := c.sh
	n := c.n
	res := &repResult{sets: make([]setResult, n+c.nsets), idealBad: rp.idealBad}
	var hsS, hsP histStats
	for u := 0; u < n; u++ {
		scanStats(sh.sl, c.sC[u*c.ss:(u+1)*c.ss], int(c.sLoC[u]), int(c.sHiC[u]), uint64(c.cCnt[u]), c.quantiles, &hsS, nil)
		scanStats(sh.pl, c.pC[u*c.ps:(u+1)*c.ps], int(c.pLoC[u]), int(c.pHiC[u]), uint64(c.cCnt[u]), c.quantiles, &hsP, nil)
		res.sets[u] = c.setValues(u, &hsS, &hsP, c.cCnt[u], c.cOut[u], c.cMax[u], c.cBlk[u], c.cErr[u], c.cPsum[u])
		res.sets[u].users = 1
	}
	for s := 0; s < c.nsets; s++ {
		var cnt, out, mx, blk, errs int64
		var psum float64
		for u := 0; u < n; u++ {
			if s == c.nsets-1 || sh.users[u].bin == s {
				cnt += c.cCnt[u]
				out += c.cOut[u]
				mx += c.cMax[u]
				blk += c.cBlk[u]
				errs += c.cErr[u]
				psum += c.cPsum[u]
			}
		}
		scanStats(sh.sl, c.setSC[s], c.setSLoC[s], c.setSHiC[s], uint64(cnt), c.quantiles, &hsS, nil)
		scanStats(sh.pl, c.setPC[s], c.setPLoC[s], c.setPHiC[s], uint64(cnt), c.quantiles, &hsP, nil)
		res.sets[n+s] = c.setValues(n+s, &hsS, &hsP, cnt, out, mx, blk, errs, psum)
		res.sets[n+s].users = c.setUsers[s]
	}
	agg := c.setSC[c.nsets-1]
	res.underOver = int64(agg[0] + agg[len(agg)-1])
	var hn histStats
	scanStats(sh.nl, c.nrC, c.nrLoC, c.nrHiC, uint64(c.nrCntC), c.quantiles, &hn, nil)
	res.nrMean, res.nrP95 = hn.mean, hn.q[3]
	if k := c.nrK; k > 1 {
		for i := range 2 {
			m := c.nrSum[i] / float64(k)
			v := (c.nrSq[i] - float64(k)*m*m) / float64(k-1)
			res.nrSE[i] = math.Sqrt(math.Max(v, 0) / float64(k))
		}
		res.nrDof = k - 1
	}
	res.conv = make([]float64, n)
	res.converged = make([]bool, n)
	for u := 0; u < n; u++ {
		if c.conv[u] >= 0 {
			res.conv[u] = float64(c.conv[u]) / sh.rateHz
			res.converged[u] = true
		} else {
			res.conv[u] = float64(sh.total) / sh.rateHz
		}
	}
	for s := range res.sets {
		sum, k := 0.0, 0
		for u := 0; u < n; u++ {
			if s == u || (s >= n && (s == n+c.nsets-1 || sh.users[u].bin == s-n)) {
				sum += res.conv[u]
				k++
			}
		}
		if k > 0 {
			res.sets[s].conv = sum / float64(k)
		}
	}
	res.targetDB = append([]float64(nil), rp.bank.targetDB...)
	if rp.trace != nil {
		res.traces = rp.trace.out
		res.traceCut = rp.trace.truncated
	}
	return res
}

func anyPositive(x []int64) bool {
	for _, v := range x {
		if v > 0 {
			return true
		}
	}
	return false
}

// MaxTracePoints is the most samples a trace keeps per user; a longer
// trace is cut there (and the report says so).
const MaxTracePoints = 1 << 22

// traceDB is 10·log10(x) as float32, floored at −400 dB (so that a zero
// gain stays finite in JSON).
func traceDB(x float64) float32 {
	if !(x > 1e-40) {
		return -400
	}
	return float32(linToDB(x))
}

// tracer records decimated traces of chosen users (replication 0).
type tracer struct {
	users     []int
	dec       int64
	out       []UserTrace
	truncated bool
}

func newTracer(o TraceOptions, total int64) *tracer {
	d := int64(max(o.Decimation, 1))
	tr := &tracer{users: o.Users, dec: d}
	capN := int(min(total/d+1, 1<<16))
	for _, u := range o.Users {
		tr.out = append(tr.out, UserTrace{User: u, Slots: make([]int64, 0, capN), SIRDB: make([]float32, 0, capN),
			TargetDB: make([]float32, 0, capN), TxPowerDBm: make([]float32, 0, capN), ChannelGainDB: make([]float32, 0, capN)})
	}
	return tr
}

func (tr *tracer) slot(t int64, rp *replication, act []uint8) {
	if t%tr.dec != 0 {
		return
	}
	for i, u := range tr.users {
		if act != nil && act[u] == 0 {
			continue // inactive: no sample
		}
		o := &tr.out[i]
		if len(o.Slots) >= MaxTracePoints {
			tr.truncated = true
			continue
		}
		o.Slots = append(o.Slots, t)
		o.SIRDB = append(o.SIRDB, traceDB(rp.sir[u]))
		o.TargetDB = append(o.TargetDB, float32(rp.bank.targetDB[u]))
		o.TxPowerDBm = append(o.TxPowerDBm, traceDB(rp.bank.p[u]))
		o.ChannelGainDB = append(o.ChannelGainDB, traceDB(rp.gcol[u]))
	}
}
