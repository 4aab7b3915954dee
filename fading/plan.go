package fading

// Interpolation plans: for each output sample of a decimating channel, the
// first node in its internal buffer and the weight row of its fractional
// position (interpTable), computed per chunk of up to outChunk samples
// and shared between channels on one clock through a PlanCache.

// plan prepares the interpolation of up to max (>= 1) output samples from
// c.m on, refilling the internal buffer first if needed, and stops before
// any sample that would need another refill. It stores per sample the
// buffer offset of the first node in c.idx and the offset of its weight
// row in interpTable (nearest tabulated phase) in c.wrow, and
// returns the number of samples planned (>= 1).
func (c *Channel) plan(max int) int {
	n := min(max, outChunk)
	c.planRefill()
	idx, wrow := c.ownPlan()
	return c.planCompute(n, idx, wrow)
}

// ownPlan returns the channel's own plan arrays, made on their first use:
// channels that always take their plans from a PlanCache (the multi-cell
// legs) never need them.
func (c *Channel) ownPlan() (idx, wrow []int32) {
	if c.idx == nil {
		c.idx, c.wrow = make([]int32, outChunk), make([]int32, outChunk)
	}
	return c.idx, c.wrow
}

// planRefill refills the internal buffer until it holds the first node of
// output sample c.m.
func (c *Channel) planRefill() {
	for {
		k := int64(float64(c.m)*c.step + interpBefore)
		if k+interpTaps-interpBefore <= c.blockStart+int64(c.blk) {
			break
		}
		c.refill()
	}
}

// planCompute is plan after planRefill: it plans up to n <= outChunk
// samples into idx and wrow (at least n long) and advances c.m.
func (c *Channel) planCompute(n int, idx, wrow []int32) int {
	step, m := c.step, c.m
	end := c.blockStart + int64(c.blk)
	base := c.blockStart - int64(c.hist) + interpBefore
	idx, wrow = idx[:n], wrow[:n]
	i := 0
	for ; i < n; i++ {
		p := float64(m+int64(i))*step + interpBefore
		k := int64(p)
		if k+interpTaps-interpBefore > end {
			break
		}
		idx[i] = int32(k - base)
		wrow[i] = int32(int(float64(interpPhases)*(p-float64(k))+0.5) * interpTaps)
	}
	c.m += int64(i)
	return i
}

// PlanCache keeps the last few interpolation plans of FillGainsShared, so
// that channels with the same internal step (same Doppler and sample rate)
// and the same block length, advanced in step (as the users of a loop
// block are), compute each plan once instead of once per channel. A plan
// is a function of (step, position, internal block) only, so a shared
// plan is the one the channel would compute: the gains are bit for bit
// those of FillGains. Not safe for concurrent use (one per goroutine); the
// zero value is ready.
type PlanCache struct {
	next int
	ents [8]planEntry
}

type planEntry struct {
	used             bool
	step             float64
	m, blockStart    int64
	hist, blk, mx, n int
	ok               bool // interpIndexOK held for the buffers of this key
	idx, wrow        [outChunk]int32
}

// planShared plans up to max output samples from c.m (plan), taking the
// plan from pc when it holds one for the same key, and returns the sample
// count, the plan and whether interpIndexOK holds for it.
func (c *Channel) planShared(max int, pc *PlanCache) (int, []int32, []int32, bool) {
	mx := min(max, outChunk)
	c.planRefill()
	if pc == nil {
		idx, wrow := c.ownPlan()
		n := c.planCompute(mx, idx, wrow)
		return n, idx[:n], wrow[:n], useAVX && interpIndexOK(idx[:n], wrow[:n], c.hist+c.blk)
	}
	for i := range pc.ents {
		e := &pc.ents[i]
		if e.used && e.m == c.m && e.step == c.step && e.blockStart == c.blockStart && e.mx == mx && e.hist == c.hist && e.blk == c.blk {
			c.m += int64(e.n)
			return e.n, e.idx[:e.n], e.wrow[:e.n], e.ok
		}
	}
	// A new plan, computed straight into the entry it replaces.
	m0 := c.m
	e := &pc.ents[pc.next]
	pc.next = (pc.next + 1) % len(pc.ents)
	n := c.planCompute(mx, e.idx[:], e.wrow[:])
	e.used, e.step, e.m, e.blockStart, e.hist, e.blk, e.mx, e.n = true, c.step, m0, c.blockStart, c.hist, c.blk, mx, n
	e.ok = useAVX && interpIndexOK(e.idx[:n], e.wrow[:n], c.hist+c.blk)
	return n, e.idx[:n], e.wrow[:n], e.ok
}
