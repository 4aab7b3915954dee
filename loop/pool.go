package loop

import "sync"

// pool holds the histograms of every set (users, distance bins, the
// aggregate) and of the noise rise summed over the replications of a run,
// so that with several replications the percentiles, mean and std are those
// of all replications' samples together (pooled), not averages of
// per-replication values. Counts are integers, so the sums do not depend on
// the order in which replications finish. Only runs with more than one
// replication keep a pool.
type pool struct {
	mu       sync.Mutex
	sir, pow []pooledHist // per set index (users, then sets)
	rise     pooledHist
}

// pooledHist is one pooled histogram and the range of its used bins.
type pooledHist struct {
	counts []uint64
	lo, hi int
	n      uint64
}

// addCounts adds the counts of bins [lo, hi] to h.
func addCounts[T uint32 | uint64](h *pooledHist, counts []T, lo, hi int) {
	if lo > hi {
		return
	}
	if h.counts == nil {
		h.counts = make([]uint64, len(counts))
		h.lo, h.hi = lo, hi
	}
	h.lo, h.hi = min(h.lo, lo), max(h.hi, hi)
	for j := lo; j <= hi; j++ {
		h.counts[j] += uint64(counts[j])
		h.n += uint64(counts[j])
	}
}

// stats summarises the pooled histogram (scanStats).
func (h *pooledHist) stats(l *histLayout, out *histStats) {
	if h.counts == nil {
		*out = histStats{}
		return
	}
	scanStats(l, h.counts, h.lo, h.hi, h.n, quantileSpec[:], out, nil)
}

func newPool(sets int) *pool {
	return &pool{sir: make([]pooledHist, sets), pow: make([]pooledHist, sets)}
}

// addCollector adds a finished replication's cumulative histograms.
func (p *pool) addCollector(c *collector) {
	p.mu.Lock()
	defer p.mu.Unlock()
	n := c.users
	for u := 0; u < n; u++ {
		addCounts(&p.sir[u], c.sir.cum[u*c.sir.stride:(u+1)*c.sir.stride], int(c.sir.loCum[u]), int(c.sir.hiCum[u]))
		addCounts(&p.pow[u], c.pow.cum[u*c.pow.stride:(u+1)*c.pow.stride], int(c.pow.loCum[u]), int(c.pow.hiCum[u]))
	}
	for s := 0; s < c.sets; s++ {
		if c.sir.setCum[s] == nil {
			continue
		}
		addCounts(&p.sir[n+s], c.sir.setCum[s], c.sir.setLoCum[s], c.sir.setHiCum[s])
		addCounts(&p.pow[n+s], c.pow.setCum[s], c.pow.setLoCum[s], c.pow.setHiCum[s])
	}
	addCounts(&p.rise, c.riseCum, c.riseLoCum, c.riseHiCum)
}
