package loop

import "math"

// setResult is a set's figures from one replication: the point estimate of
// each statistic over the run, the standard error from batch means and its
// degrees of freedom (K−1 batches), and the sample sizes.
type setResult struct {
	users  int
	slots  int64 // active measured user-slots
	blocks int64
	// Counts behind the proportions and the mean power, for pooling
	// replications in replication order.
	outage, atMax, blockErrs int64
	powSumMW                 float64
	val                      [nStat]float64
	se                       [nStat]float64
	dof                      [nStat]int
	ok                       [nStat]bool
	conv                     float64 // mean convergence time over the set's users, s
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

// pointValues are the statistics of a set over a run from its SIR-error
// and Tx-power histograms and counters (slots, outage, at max, blocks,
// block errors, Σ power in mW).
func pointValues(hsS, hsP *histStats, cnt, out, mx, blk, errs int64, psum float64) (val [nStat]float64) {
	if cnt > 0 {
		val[stSIRMean], val[stSIRStd] = hsS.mean, hsS.std
		for q := range 5 {
			val[stSIRQ+q] = hsS.q[q]
			val[stPowQ+q] = hsP.q[q]
		}
		val[stOutage] = float64(out) / float64(cnt)
		val[stMaxFrac] = float64(mx) / float64(cnt)
		val[stPowMean] = linToDB(psum / float64(cnt))
		if blk > 0 {
			val[stBLER] = float64(errs) / float64(blk)
		}
	}
	return val
}

func (c *collector) setValues(i int, hsS, hsP *histStats, cnt, out, mx, blk, errs int64, psum float64) setResult {
	r := setResult{slots: cnt, blocks: blk, outage: out, atMax: mx, blockErrs: errs, powSumMW: psum}
	r.val = pointValues(hsS, hsP, cnt, out, mx, blk, errs, psum)
	for st := 0; st < nStat; st++ {
		j := i*nStat + st
		k := int(c.statBatches[j])
		if k == 0 {
			continue
		}
		r.ok[st] = true
		if k > 1 {
			m := c.statSum[j] / float64(k)
			v := (c.statSumSq[j] - float64(k)*m*m) / float64(k-1)
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

// result finishes the replication's figures (a last partial batch is
// folded in); the caller adds what the collector does not see (final
// targets, ideal-mode failures, traces).
func (c *collector) result() *repResult {
	c.waitBatch()
	c.flushFused()
	if c.riseSlots > 0 || anyPositive(c.batchSlots) {
		c.endBatchNow()
	}
	sh := c.shared
	n := c.users
	res := &repResult{sets: make([]setResult, n+c.sets)}
	var hsS, hsP histStats
	for u := 0; u < n; u++ {
		scanStats(sh.sirLayout, c.sir.cum[u*c.sir.stride:(u+1)*c.sir.stride], int(c.sir.loCum[u]), int(c.sir.hiCum[u]), uint64(c.cumSlots[u]), c.quantiles, &hsS, nil)
		scanStats(sh.powLayout, c.pow.cum[u*c.pow.stride:(u+1)*c.pow.stride], int(c.pow.loCum[u]), int(c.pow.hiCum[u]), uint64(c.cumSlots[u]), c.quantiles, &hsP, nil)
		res.sets[u] = c.setValues(u, &hsS, &hsP, c.cumSlots[u], c.cumOutage[u], c.cumAtMax[u], c.cumBlocks[u], c.cumBlockErrs[u], c.cumPowSum[u])
		res.sets[u].users = 1
	}
	for s := 0; s < c.sets; s++ {
		var cnt, out, mx, blk, errs int64
		var psum float64
		for u := 0; u < n; u++ {
			if s == c.sets-1 || sh.users[u].bin == s {
				cnt += c.cumSlots[u]
				out += c.cumOutage[u]
				mx += c.cumAtMax[u]
				blk += c.cumBlocks[u]
				errs += c.cumBlockErrs[u]
				psum += c.cumPowSum[u]
			}
		}
		scanStats(sh.sirLayout, c.sir.setCum[s], c.sir.setLoCum[s], c.sir.setHiCum[s], uint64(cnt), c.quantiles, &hsS, nil)
		scanStats(sh.powLayout, c.pow.setCum[s], c.pow.setLoCum[s], c.pow.setHiCum[s], uint64(cnt), c.quantiles, &hsP, nil)
		res.sets[n+s] = c.setValues(n+s, &hsS, &hsP, cnt, out, mx, blk, errs, psum)
		res.sets[n+s].users = c.setUsers[s]
	}
	agg := c.sir.setCum[c.sets-1]
	res.underOver = int64(agg[0] + agg[len(agg)-1])
	var hn histStats
	scanStats(sh.riseLayout, c.riseCum, c.riseLoCum, c.riseHiCum, uint64(c.riseSlotsCum), c.quantiles, &hn, nil)
	res.nrMean, res.nrP95 = hn.mean, hn.q[3]
	if k := c.riseBatches; k > 1 {
		for i := range 2 {
			m := c.riseBatchSum[i] / float64(k)
			v := (c.riseBatchSumSq[i] - float64(k)*m*m) / float64(k-1)
			res.nrSE[i] = math.Sqrt(math.Max(v, 0) / float64(k))
		}
		res.nrDof = k - 1
	}
	res.conv = make([]float64, n)
	res.converged = make([]bool, n)
	for u := 0; u < n; u++ {
		if c.convergedAt[u] >= 0 {
			res.conv[u] = float64(c.convergedAt[u]) / sh.rateHz
			res.converged[u] = true
		} else {
			res.conv[u] = float64(sh.total) / sh.rateHz
		}
	}
	for s := range res.sets {
		sum, k := 0.0, 0
		for u := 0; u < n; u++ {
			if s == u || (s >= n && (s == n+c.sets-1 || sh.users[u].bin == s-n)) {
				sum += res.conv[u]
				k++
			}
		}
		if k > 0 {
			res.sets[s].conv = sum / float64(k)
		}
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
