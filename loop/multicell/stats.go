package multicell

import (
	"fmt"
	"math"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
)

// sums are the additive statistics of one unit (a batch of slots of one
// replication, or a whole replication).
type sums struct {
	slots                            float64
	userSlots, outage, atMax         float64
	edgeSlots, edgeAtMax             float64
	legSlots, legOutage, legAtMax    [LegStates]float64
	sirErrDB, sirErrDB2, txDBm       float64
	blocks, blockErrs                float64
	ownMW, otherMW, noiseRiseDB      float64 // over every cell
	cellOwnMW, cellOtherMW, cellRise []float64
	cellServed                       []float64
}

func newSums(cells int) sums {
	return sums{cellOwnMW: make([]float64, cells), cellOtherMW: make([]float64, cells),
		cellRise: make([]float64, cells), cellServed: make([]float64, cells)}
}

func (s *sums) add(o *sums) {
	s.slots += o.slots
	s.userSlots += o.userSlots
	s.outage += o.outage
	s.atMax += o.atMax
	s.edgeSlots += o.edgeSlots
	s.edgeAtMax += o.edgeAtMax
	for i := range s.legSlots {
		s.legSlots[i] += o.legSlots[i]
		s.legOutage[i] += o.legOutage[i]
		s.legAtMax[i] += o.legAtMax[i]
	}
	s.sirErrDB += o.sirErrDB
	s.sirErrDB2 += o.sirErrDB2
	s.txDBm += o.txDBm
	s.blocks += o.blocks
	s.blockErrs += o.blockErrs
	s.ownMW += o.ownMW
	s.otherMW += o.otherMW
	s.noiseRiseDB += o.noiseRiseDB
	for c := range s.cellOwnMW {
		s.cellOwnMW[c] += o.cellOwnMW[c]
		s.cellOtherMW[c] += o.cellOtherMW[c]
		s.cellRise[c] += o.cellRise[c]
		s.cellServed[c] += o.cellServed[c]
	}
}

// collector gathers one replication's statistics.
type collector struct {
	batches   []sums
	cur       int   // current batch
	measured  int64 // measured slots so far
	perBatch  float64
	ratioHist [][]uint32 // per cell: per-slot other/own in dB
	riseHist  [][]uint32 // per cell: per-slot noise rise in dB
	riseBatch []uint32   // the current batch's noise rise over every cell, dB
	riseP95   []float64  // per batch: 95th percentile of riseBatch, dB
	users     []userAcc  // replication 0 only
	sirDB     []float64  // users1's scratch: one slot's combined SIR per user, dB
	ub        []float64  // per-user sums since the last flushUsers (record.go: ubFields per user)
	ubSlots   int        // slots in ub
	riseDB    []float64  // cells' scratch: one slot's noise rise per cell, dB
	ratioDB   []float64  // cells' scratch: one slot's other-to-own ratio per cell, dB
}

type userAcc struct{ slots, outage, legs, txDBm float64 }

func newCollector(rp *rep, r int) *collector {
	nb := rp.cfg.Run.Batches
	c := &collector{batches: make([]sums, nb), sirDB: make([]float64, rp.U), ub: make([]float64, ubLen(rp.U)), riseDB: make([]float64, rp.C), ratioDB: make([]float64, rp.C)}
	for i := range c.batches {
		c.batches[i] = newSums(rp.C)
	}
	c.perBatch = float64(rp.cfg.Run.Slots-rp.cfg.Run.WarmupSlots) / float64(nb)
	c.riseBatch = make([]uint32, histBins)
	c.riseP95 = make([]float64, nb)
	c.ratioHist = make([][]uint32, rp.C)
	c.riseHist = make([][]uint32, rp.C)
	for i := range c.ratioHist {
		c.ratioHist[i] = make([]uint32, histBins)
		c.riseHist[i] = make([]uint32, histBins)
	}
	if r == 0 {
		c.users = make([]userAcc, rp.U)
	}
	return c
}

func histIndex(db float64) int {
	i := int((db - histLoDB) / histBinsDB)
	return min(histBins-1, max(0, i))
}

// cells records the cells' interference of one slot (received power rx,
// own-cell power own per cell, noise noiseMW, mW) and closes the slot.
func (c *collector) cells(rx, own []float64, noiseMW float64) {
	b := &c.batches[c.cur]
	b.slots++
	own = own[:len(rx)]
	// The cells' noise rise and other-to-own ratio in dB, each in one call.
	rise, ratio := c.riseDB[:len(rx)], c.ratioDB[:len(rx)]
	for k := range rx {
		rise[k] = rx[k] / noiseMW
		ratio[k] = 1 // unused: no own-cell power
		if own[k] > 0 {
			ratio[k] = math.Max(math.Max(0, rx[k]-noiseMW-own[k])/own[k], 1e-30)
		}
	}
	linToDBFloorTo(rise, rise, 0)
	linToDBFloorTo(ratio, ratio, 0)
	for k := range rx {
		own := own[k]
		other := math.Max(0, rx[k]-noiseMW-own)
		rise := rise[k]
		b.ownMW += own
		b.otherMW += other
		b.noiseRiseDB += rise
		b.cellOwnMW[k] += own
		b.cellOtherMW[k] += other
		b.cellRise[k] += rise
		if own > 0 {
			c.ratioHist[k][histIndex(ratio[k])]++
		}
		i := histIndex(rise)
		c.riseHist[k][i]++
		c.riseBatch[i]++
	}
	closes := c.closesBatch()
	c.measured++
	if closes {
		c.closeBatch()
		c.cur++
	}
}

// closesBatch reports whether the slot being recorded closes the current
// batch (cells then moves to the next).
func (c *collector) closesBatch() bool {
	return float64(c.measured+1) >= float64(c.cur+1)*c.perBatch && c.cur < len(c.batches)-1
}

// closeBatch records the current batch's noise-rise percentile and
// clears its histogram.
func (c *collector) closeBatch() {
	c.riseP95[c.cur] = histPercentile(c.riseBatch, 0.95)
	clear(c.riseBatch)
}

// repResult is one replication's statistics.
type repResult struct {
	batches   []sums
	total     sums
	ratioHist [][]uint32
	riseHist  [][]uint32
	riseP95   []float64 // per batch
	users     []userAcc
	points    []UserPoint
	userSlots int64
}

func (c *collector) result(rp *rep) *repResult {
	c.closeBatch()
	res := &repResult{batches: c.batches, total: newSums(rp.C), ratioHist: c.ratioHist, riseHist: c.riseHist, riseP95: c.riseP95, users: c.users}
	for i := range c.batches {
		res.total.add(&c.batches[i])
	}
	res.userSlots = int64(rp.U) * rp.cfg.Run.Slots
	if c.users != nil {
		for u, us := range rp.users {
			a := c.users[u]
			pt := UserPoint{XM: us.x, YM: us.y, Group: us.group, BestCell: int(us.best)}
			if a.slots > 0 {
				pt.MeanLegs = a.legs / a.slots
				pt.OutageProbability = a.outage / a.slots
				pt.TxPowerMeanDBm = a.txDBm / a.slots
			}
			res.points = append(res.points, pt)
		}
	}
	return res
}

// histPercentile is the q-quantile of a dB histogram, interpolated
// linearly inside the bin where the cumulative count reaches q·n (exact to
// one bin, histBinsDB); NaN for an empty histogram.
func histPercentile(h []uint32, q float64) float64 {
	var n uint64
	for _, x := range h {
		n += uint64(x)
	}
	if n == 0 {
		return math.NaN()
	}
	want := q * float64(n)
	var cum uint64
	for i, x := range h {
		if x == 0 {
			continue
		}
		if next := cum + uint64(x); float64(next) >= want {
			frac := (want - float64(cum)) / float64(x)
			return histLoDB + (float64(i)+min(1, max(0, frac)))*histBinsDB
		}
		cum += uint64(x)
	}
	return histHiDB
}

// riseP95 is the 95th percentile of the per-slot noise rise over every
// cell and slot of every replication (the pooled histograms), with a 95 %
// interval of half-width t·s/√k from the spread s of the same percentile
// over k units — the batch groups of one replication (batchGroups; a
// group's value is the mean of its batches' percentiles; conditional on
// the drop), or the replications (independent drops) — as meanInterval does
// for means (Student t, loop.StudentT95), at least half a bin (the
// histogram's resolution), inside [0, ∞) dB.
func riseP95(res []*repResult, C int, groups [][2]int) loop.Estimate {
	pooled := make([]uint32, histBins)
	units := make([]float64, 0, len(res))
	for _, r := range res {
		rep := make([]uint32, histBins)
		for c := 0; c < C; c++ {
			for i, x := range r.riseHist[c] {
				rep[i] += x
			}
		}
		for i, x := range rep {
			pooled[i] += x
		}
		units = append(units, histPercentile(rep, 0.95))
	}
	if len(res) == 1 {
		// A group's value: the mean of its batches' percentiles; no groups:
		// the interval is withheld (batchGroups).
		units = units[:0]
		for _, g := range groups {
			m, n := 0.0, 0
			for _, x := range res[0].riseP95[g[0]:g[1]] {
				if !math.IsNaN(x) {
					m += x
					n++
				}
			}
			if n > 0 {
				units = append(units, m/float64(n))
			}
		}
	}
	v := histPercentile(pooled, 0.95)
	if math.IsNaN(v) {
		return loop.Withheld(math.NaN())
	}
	v = math.Max(0, v)
	if len(res) == 1 && groups == nil {
		return loop.Withheld(v)
	}
	e := meanInterval(units)
	h := math.Max((e.CIHigh-e.CILow)/2, histBinsDB/2)
	if math.IsNaN(h) {
		return loop.Withheld(v)
	}
	return loop.Estimate{Value: v, CILow: math.Max(0, v-h), CIHigh: v + h}
}

// merge combines the replications into the report. With one replication
// the units of the intervals are batch groups of the drop (batchGroups);
// when too few groups of at least groupDecorrelationTimes decorrelation
// times fit in the run, every interval is withheld (Value kept, NaN
// bounds) and the report's note says how long the run would need to be.
func merge(cfg Config, res []*repResult) *Report {
	C := cfg.Layout.Cells()
	units := make([]*sums, 0)
	var groups [][2]int // one replication: the batch groups forming the units
	hold := true        // intervals are given (false: withheld, one replication)
	var intervalNote string
	if len(res) == 1 {
		dc, what := decorrelationSlots(cfg)
		groups = batchGroups(res[0].batches, C, groupDecorrelationTimes*dc)
		hold = groups != nil
		intervalNote = oneReplicationNote(cfg, dc, what, len(groups))
		for _, g := range groups {
			u := newSums(C)
			for i := g[0]; i < g[1]; i++ {
				u.add(&res[0].batches[i])
			}
			units = append(units, &u)
		}
	} else {
		for _, r := range res {
			units = append(units, &r.total)
		}
	}
	total := newSums(C)
	var userSlots int64
	for _, r := range res {
		total.add(&r.total)
		userSlots += r.userSlots
	}
	ratio := func(num, den func(*sums) float64) loop.Estimate {
		xs := make([]float64, 0, len(units))
		for _, u := range units {
			if den(u) > 0 {
				xs = append(xs, num(u)/den(u))
			}
		}
		e := meanInterval(xs)
		if d := den(&total); d > 0 {
			v := num(&total) / d
			if !hold {
				return loop.Withheld(v)
			}
			h := (e.CIHigh - e.CILow) / 2
			e = loop.Estimate{Value: v, CILow: v - h, CIHigh: v + h}
		}
		return e
	}
	prop := func(hit, n func(*sums) float64) loop.Estimate {
		ps := make([]float64, 0, len(units))
		for _, u := range units {
			if n(u) > 0 {
				ps = append(ps, hit(u)/n(u))
			}
		}
		e := proportionInterval(hit(&total), n(&total), ps)
		if !hold {
			return loop.Withheld(e.Value)
		}
		return e
	}
	nonNeg := func(e loop.Estimate) loop.Estimate {
		e.CILow = math.Max(0, e.CILow)
		return e
	}
	rep := &Report{Config: cfg, Users: len(res[0].points), MeasuredSlots: cfg.Run.Slots - cfg.Run.WarmupSlots, SimulatedUserSlots: userSlots}
	if rep.Users == 0 {
		rep.Users = int(res[0].userSlots / cfg.Run.Slots)
	}
	o := &rep.Overall
	o.OtherToOwn = nonNeg(ratio(func(s *sums) float64 { return s.otherMW }, func(s *sums) float64 { return s.ownMW }))
	o.NoiseRiseDB = nonNeg(ratio(func(s *sums) float64 { return s.noiseRiseDB }, func(s *sums) float64 { return s.slots * float64(C) }))
	o.OutageProbability = prop(func(s *sums) float64 { return s.outage }, func(s *sums) float64 { return s.userSlots })
	o.SoftHandoverShare = prop(func(s *sums) float64 { return s.userSlots - s.legSlots[0] }, func(s *sums) float64 { return s.userSlots })
	o.TimeAtMaxPower = prop(func(s *sums) float64 { return s.atMax }, func(s *sums) float64 { return s.userSlots })
	o.TimeAtMaxEdge = prop(func(s *sums) float64 { return s.edgeAtMax }, func(s *sums) float64 { return s.edgeSlots })
	o.OutageByLegs = make([]loop.Estimate, LegStates)
	o.LegShare = make([]loop.Estimate, LegStates)
	o.TimeAtMaxByLegs = make([]loop.Estimate, LegStates)
	for i := 0; i < LegStates; i++ {
		o.OutageByLegs[i] = prop(func(s *sums) float64 { return s.legOutage[i] }, func(s *sums) float64 { return s.legSlots[i] })
		o.LegShare[i] = prop(func(s *sums) float64 { return s.legSlots[i] }, func(s *sums) float64 { return s.userSlots })
		o.TimeAtMaxByLegs[i] = prop(func(s *sums) float64 { return s.legAtMax[i] }, func(s *sums) float64 { return s.legSlots[i] })
	}
	o.SIRErrorMeanDB = ratio(func(s *sums) float64 { return s.sirErrDB }, func(s *sums) float64 { return s.userSlots })
	std := func(s *sums) float64 {
		m := s.sirErrDB / s.userSlots
		return math.Sqrt(math.Max(0, s.sirErrDB2/s.userSlots-m*m))
	}
	stds := make([]float64, 0, len(units))
	for _, u := range units {
		if u.userSlots > 0 {
			stds = append(stds, std(u))
		}
	}
	se := meanInterval(stds)
	v := std(&total)
	h := (se.CIHigh - se.CILow) / 2
	o.SIRErrorStdDB = loop.Estimate{Value: v, CILow: math.Max(0, v-h), CIHigh: v + h}
	if !hold {
		o.SIRErrorStdDB = loop.Withheld(v)
	}
	o.TxPowerMeanDBm = ratio(func(s *sums) float64 { return s.txDBm }, func(s *sums) float64 { return s.userSlots })
	o.AchievedBLER = prop(func(s *sums) float64 { return s.blockErrs }, func(s *sums) float64 { return s.blocks })

	all := make([]uint32, histBins)
	geo := newGeometry(cfg.Layout)
	for c := 0; c < C; c++ {
		ratioH := make([]uint32, histBins)
		riseH := make([]uint32, histBins)
		for _, r := range res {
			for i := range ratioH {
				ratioH[i] += r.ratioHist[c][i]
				riseH[i] += r.riseHist[c][i]
			}
		}
		for i := range all {
			all[i] += ratioH[i]
		}
		cf := CellFigures{Name: cfg.Layout.CellName(c), Site: c / cfg.Layout.SectorsPerSite}
		cf.SiteXM, cf.SiteYM = geo.sites[cf.Site].x, geo.sites[cf.Site].y
		if b := geo.cells[c].boresight; !math.IsNaN(b) {
			cf.BoresightDeg = b * 180 / math.Pi
		}
		cf.OtherToOwn = nonNeg(ratio(func(s *sums) float64 { return s.cellOtherMW[c] }, func(s *sums) float64 { return s.cellOwnMW[c] }))
		cf.NoiseRiseDB = nonNeg(ratio(func(s *sums) float64 { return s.cellRise[c] }, func(s *sums) float64 { return s.slots }))
		cf.OtherToOwnP50 = math.Pow(10, histPercentile(ratioH, 0.5)/10)
		cf.OtherToOwnP95 = math.Pow(10, histPercentile(ratioH, 0.95)/10)
		cf.NoiseRiseP95DB = histPercentile(riseH, 0.95)
		if total.slots > 0 {
			cf.ServedUsers = total.cellServed[c] / total.slots
		}
		rep.Cells = append(rep.Cells, cf)
	}
	rep.NoiseRiseP95DB = riseP95(res, C, groups)
	o.OtherToOwnSpreadP5 = math.Pow(10, histPercentile(all, 0.05)/10)
	o.OtherToOwnSpreadP95 = math.Pow(10, histPercentile(all, 0.95)/10)
	rep.UserPoints = res[0].points
	rep.intervalNote = intervalNote
	return rep
}

// groupDecorrelationTimes is the shortest batch group of one replication,
// in decorrelation times of the run's slowest process (decorrelationSlots).
// With b·Var(batch mean) = σ²_∞ + γ/b + o(1/b) and γ = −2·Σ_j j·R(j) (the
// 1/b bias term of batch means; Law & Kelton, Simulation Modeling and
// Analysis, batch means in ch. 9, and Alexopoulos & Seila 1998 (memory)),
// the batch-means estimate of the variance of the run's mean, S²/k over k
// batches, is off by γ/(k·b²), relatively γ/(b·σ²_∞). For an
// autocorrelation exp(−t/τ), γ/σ²_∞ = −τ: at b ≥ 10τ the variance is at
// most 10 % low, the half-width 5 %, and a 95 % Student-t interval covers
// about 0.94 in the worst case (all of the variance at the slowest time
// scale). Shorter groups covered 0.40–0.73 before this rule (2700 measured
// slots at 120 km/h, d_c 50 m, against the same drop run 20× as long; that
// run is now withheld, TestOneReplicationWithheld). The same 10 as the
// single-cell engine (loop.BatchDecorrelationTimes).
const groupDecorrelationTimes = loop.BatchDecorrelationTimes

// decorrelationSlots is the longest correlation time of a replication's
// processes, in slots, and what it is: for each moving group, the time to
// travel the shadowing decorrelation distance d_c/v (Gudmundson 1991: the
// shadowing in dB has autocorrelation exp(−v·t/d_c); with shadowing) and
// 0.4/f_D (the first zero of the Clarke autocorrelation J0(2π f_D τ) is at
// f_D τ = 0.3827; Clarke 1968 (memory); with fast fading); the shadowing
// update interval (with shadowing and a moving group) and the active-set
// update interval (each holds its state that long); with the outer loop
// on, block_slots/bler_target (the mean spacing of block errors at the
// target: the jump-rule target makes one up step and walks back down over
// that time; as loop.BatchDecorrelationTimes documents for one cell). A group at 0 km/h keeps its shadowing and fading
// for the whole run: they are part of the drop, not a process in time.
func decorrelationSlots(cfg Config) (slots float64, what string) {
	rate := cfg.InnerLoop.UpdateRateHz
	slots, what = float64(cfg.Handover.UpdateSlots), fmt.Sprintf("the active-set update interval (%d slots)", cfg.Handover.UpdateSlots)
	moving := false
	for _, g := range cfg.Groups {
		moving = moving || g.SpeedKmh > 0
	}
	// The held shadowing counts only where it changes (σ > 0, someone
	// moves): otherwise the update interval holds nothing.
	if s := float64(cfg.Channel.ShadowingSlots); s > slots && cfg.Channel.ShadowingDB > 0 && moving {
		slots, what = s, fmt.Sprintf("the shadowing update interval (%d slots)", cfg.Channel.ShadowingSlots)
	}
	for i, g := range cfg.Groups {
		if g.SpeedKmh <= 0 {
			continue
		}
		name := g.Name
		if name == "" {
			name = fmt.Sprintf("%d", i)
		}
		v := g.SpeedKmh / 3.6
		if cfg.Channel.ShadowingDB > 0 {
			if s := cfg.Channel.DecorrelationM / v * rate; s > slots {
				slots, what = s, fmt.Sprintf("the shadowing of group %s at %g km/h (%g m / %.3g m/s = %.0f slots)", name, g.SpeedKmh, cfg.Channel.DecorrelationM, v, s)
			}
		}
		if cfg.Channel.FastFading != FastFadingNone {
			if s := 0.4 / fading.DopplerHz(g.SpeedKmh, cfg.Channel.CarrierHz) * rate; s > slots {
				slots, what = s, fmt.Sprintf("the fast fading of group %s at %g km/h (0.4/f_D = %.0f slots)", name, g.SpeedKmh, s)
			}
		}
	}
	if ol := cfg.OuterLoop; ol.Enabled {
		if s := float64(ol.BlockSlots) / ol.BLERTarget; s > slots {
			slots, what = s, fmt.Sprintf("the outer loop (block_slots/bler_target = %.0f slots)", s)
		}
	}
	return slots, what
}

// oneReplicationNote is the report's note on the intervals of one
// replication: k groups of at least groupDecorrelationTimes decorrelation
// times of dc slots (what: the slowest process), k = 0 when too few fit.
func oneReplicationNote(cfg Config, dc float64, what string, k int) string {
	measured := cfg.Run.Slots - cfg.Run.WarmupSlots
	if k == 0 {
		return fmt.Sprintf("one replication: no intervals (bounds not available): the %d measured slots span %.2g decorrelation times of the slowest process, %s; an interval over time within one drop needs %d batch groups of %d decorrelation times, at least %.0f measured slots; run 2 or more replications (intervals over independent drops) or lengthen the run",
			measured, float64(measured)/dc, what, minBatchGroups, groupDecorrelationTimes, minBatchGroups*groupDecorrelationTimes*dc)
	}
	return fmt.Sprintf("one replication: the intervals describe this drop's long-run value (users' positions fixed, time average over shadowing, fading and the loops), not the expectation over drops: Student t over %d batch groups, each at least %d decorrelation times (%.0f slots) of the slowest process, %s; run 2 or more replications for intervals over independent drops",
		k, groupDecorrelationTimes, dc, what)
}

// batchGroups groups one replication's batches into the units of its
// intervals, or returns nil (intervals withheld) when fewer than
// minBatchGroups groups of at least minSlots slots fit. Consecutive batches
// are merged until a group spans minSlots (groupDecorrelationTimes
// decorrelation times, see decorrelationSlots); the batches left over join
// the last group. Then, as a check on slower processes than the ones
// decorrelationSlots knows, the groups are merged in consecutive pairs
// while the lag-1 autocorrelation of the group means of any of the
// layout's mean noise rise, other-to-own ratio or outage is above 2/√k (k
// units; the approximate 95 % bound of a sample autocorrelation of
// independent values) and at least 2·minBatchGroups units remain (batch
// means method with batch-size doubling, e.g. Law & Kelton, Simulation
// Modeling and Analysis, §9.5 (memory)). An odd unit out joins the last
// group.
func batchGroups(b []sums, C int, minSlots float64) [][2]int {
	var groups [][2]int
	start, acc := 0, 0.0
	for i := range b {
		acc += b[i].slots
		if acc >= minSlots {
			groups = append(groups, [2]int{start, i + 1})
			start, acc = i+1, 0
		}
	}
	if len(groups) < minBatchGroups {
		return nil
	}
	groups[len(groups)-1][1] = len(b)
	series := []func(s *sums) (float64, bool){
		func(s *sums) (float64, bool) { return s.noiseRiseDB / (s.slots * float64(C)), s.slots > 0 },
		func(s *sums) (float64, bool) { return s.otherMW / s.ownMW, s.ownMW > 0 },
		func(s *sums) (float64, bool) { return s.outage / s.userSlots, s.userSlots > 0 },
	}
	for len(groups) >= 2*minBatchGroups {
		units := make([]sums, len(groups))
		for i, g := range groups {
			units[i] = newSums(C)
			for j := g[0]; j < g[1]; j++ {
				units[i].add(&b[j])
			}
		}
		bound := 2 / math.Sqrt(float64(len(units)))
		correlated := false
		for _, f := range series {
			xs := make([]float64, 0, len(units))
			for i := range units {
				if x, ok := f(&units[i]); ok {
					xs = append(xs, x)
				}
			}
			correlated = correlated || lag1(xs) > bound
		}
		if !correlated {
			break
		}
		merged := make([][2]int, 0, len(groups)/2)
		for i := 0; i+1 < len(groups); i += 2 {
			merged = append(merged, [2]int{groups[i][0], groups[i+1][1]})
		}
		if len(groups)%2 == 1 {
			merged[len(merged)-1][1] = groups[len(groups)-1][1]
		}
		groups = merged
	}
	return groups
}

// minBatchGroups is the fewest batch groups of one replication that give
// an interval (Student t with 3 degrees of freedom at 4 groups).
const minBatchGroups = 4

// lag1 is the sample lag-1 autocorrelation of xs (0 for fewer than 3
// values or no spread).
func lag1(xs []float64) float64 {
	n := len(xs)
	if n < 3 {
		return 0
	}
	m := 0.0
	for _, x := range xs {
		m += x
	}
	m /= float64(n)
	num, den := 0.0, 0.0
	for i, x := range xs {
		den += (x - m) * (x - m)
		if i > 0 {
			num += (x - m) * (xs[i-1] - m)
		}
	}
	if den == 0 {
		return 0
	}
	return num / den
}
