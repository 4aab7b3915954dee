package multicell

import (
	"cmp"
	"context"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
)

// Random stream kinds of this package (fading.NewStream; values ≥ 200 are
// this package's, clear of fading's and loop's).
const (
	streamReplication fading.StreamKind = 200 + iota // seed of replication r: user −1, index r
	streamPlacement                                  // a user's position
	streamShadowing                                  // a user's shadowing (common and per-site parts)
	streamControl                                    // a user's estimation, command and block-error draws
)

// maxLegsPerUser spaces the fading-channel user numbers: leg slot l of user u
// fades with fading.NewChannel(cfg, replication seed, u·maxLegsPerUser + l).
const maxLegsPerUser = 8

// blockSlots is the number of slots of fading generated ahead per call.
const blockSlots = 64

// histogram of dB values: 0.05 dB bins over [histLoDB, histHiDB).
const (
	histLoDB   = -40.0
	histHiDB   = 60.0
	histBinsDB = 0.05
	histBins   = int((histHiDB - histLoDB) / histBinsDB)
)

// Run simulates every replication (an independent drop of users) and
// returns the report. It checks ctx between blocks of slots. Replications
// run in parallel on up to GOMAXPROCS goroutines and are merged in order, so
// the report does not depend on the core count.
func Run(ctx context.Context, cfg Config) (*Report, error) {
	cfg.Normalise()
	if vs := cfg.Validate(); len(vs) > 0 {
		return nil, vs
	}
	R := cfg.Run.Replications
	results := make([]*repResult, R)
	errs := make([]error, R)
	sem := make(chan struct{}, max(1, runtime.GOMAXPROCS(0)))
	var wg sync.WaitGroup
	for r := 0; r < R; r++ {
		wg.Add(1)
		sem <- struct{}{}
		go func(r int) {
			defer wg.Done()
			defer func() { <-sem }()
			defer func() {
				if p := recover(); p != nil {
					errs[r] = loop.NewPanicError(p)
				}
			}()
			results[r], errs[r] = runReplication(ctx, cfg, r)
		}(r)
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	return merge(cfg, results), nil
}

// user is one user's state in a replication.
type user struct {
	group    int
	x, y     float64
	edge     bool
	pathDB   []float64           // per site: −path loss (dB), fixed
	siteLin  []float64           // per site: slow gain (path loss and shadowing), linear
	antLin   []float64           // per cell: antenna gain, linear
	shadowA  float64             // common shadowing part (dB, unit variance scaled later)
	shadowB  []float64           // per site part
	shadowK  float64             // AR(1) coefficient per shadowing update
	rng      *rand.Rand          // estimation, command, block-error and open-loop draws
	shRng    *rand.Rand          // shadowing updates
	legs     [maxLegsPerUser]int // cell of leg slot l, −1 when unused
	legCh    [maxLegsPerUser]*fading.Channel
	legAcc   [maxLegsPerUser]float64 // block accumulators (sum of linear SIR)
	legN     [maxLegsPerUser]int
	nLegs    int
	best     int // best cell (largest slow gain) of the active set
	p        float64
	pDB      float64 // 10 log10(p), dBm (setP, or ± step_db per closed-loop step)
	targetDB float64
	target   float64 // 10^(targetDB/10)
	cmds     []int8  // delay line of combined commands (+1 up, −1 down)
	olCorrDB float64
	olEstDB  []float64 // history of the open-loop gain estimate, one per shadowing update
}

// rep is one replication's working state.
type rep struct {
	cfg      Config
	g        *geometry
	users    []user
	U, C     int
	noiseMW  float64
	pg       float64
	slow     []float64 // slow gain, cell-major: slow[c·U+u], linear
	fade     [][]float64
	rx       []float64 // received power per cell this slot, mW
	own      []float64
	upLin    float64
	downLin  float64
	pmin     float64
	pmax     float64
	full     bool
	fullCh   []*fading.Channel // FULL mode: per (c, u)
	fullBuf  [][]float64
	stats    *collector
	shadowSD float64
	blockN   int      // slots in the current fading block
	fillWork chan int // block length to the fading helper (startFillHelper); nil without one
	fillDone chan any // the helper's completion: its panic value or nil
	cands    []cand   // active-set evaluation, reused
	keep     []int
}

// cand is a candidate cell of an active set and its slow gain.
type cand struct {
	c int
	g float64
}

func runReplication(ctx context.Context, cfg Config, r int) (*repResult, error) {
	seed := fading.NewStream(cfg.Run.Seed, -1, r, streamReplication).Uint64()
	rp, err := newRep(cfg, seed, r)
	if err != nil {
		return nil, err
	}
	defer rp.startFillHelper()()
	total := cfg.Run.Slots
	for t0 := int64(0); t0 < total; t0 += blockSlots {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		n := int(min(int64(blockSlots), total-t0))
		rp.fillFading(n)
		for k := 0; k < n; k++ {
			t := t0 + int64(k)
			if t%int64(cfg.Channel.ShadowingSlots) == 0 {
				rp.updateSlowGains(t)
			}
			if t%int64(cfg.Handover.UpdateSlots) == 0 {
				rp.updateActiveSets(t == 0)
			}
			rp.slot(t, k)
		}
	}
	return rp.stats.result(rp), nil
}

func newRep(cfg Config, seed uint64, r int) (*rep, error) {
	g := newGeometry(cfg.Layout)
	C := len(g.cells)
	rp := &rep{cfg: cfg, g: g, C: C}
	rp.noiseMW = math.Pow(10, (-174+10*math.Log10(cfg.Receiver.ChipRateHz)+cfg.Receiver.NoiseFigureDB)/10)
	rp.pg = cfg.Receiver.ChipRateHz / cfg.Receiver.BitRateBps
	rp.upLin = math.Pow(10, cfg.InnerLoop.StepDB/10)
	rp.downLin = 1 / rp.upLin
	rp.pmin = math.Pow(10, cfg.InnerLoop.MinPowerDBm/10)
	rp.pmax = math.Pow(10, cfg.InnerLoop.MaxPowerDBm/10)
	rp.shadowSD = cfg.Channel.ShadowingDB
	rp.full = cfg.Channel.FastFading == FastFadingFull
	d := cfg.Layout.InterSiteDistanceM
	rate := cfg.InnerLoop.UpdateRateHz
	u := 0
	for gi, grp := range cfg.Groups {
		fs, err := cfg.fingers(gi)
		if err != nil {
			return nil, loop.Violations{{Field: "groups.profile", Rule: err.Error()}}
		}
		prof := fs.Profile
		capturedDB := 0.0
		if fs.CapturedFraction > 0 && fs.CapturedFraction < 1 {
			capturedDB = 10 * math.Log10(fs.CapturedFraction)
		}
		fdHz := fading.DopplerHz(grp.SpeedKmh, cfg.Channel.CarrierHz)
		k := math.Exp(-grp.SpeedKmh / 3.6 * float64(cfg.Channel.ShadowingSlots) / rate / cfg.Channel.DecorrelationM)
		for s := range g.sites {
			for j := 0; j < grp.CountPerCell*cfg.Layout.SectorsPerSite; j++ {
				us := user{group: gi, rng: fading.NewStream(seed, u, 0, streamControl), shadowK: k}
				place := fading.NewStream(seed, u, 0, streamPlacement)
				for {
					dx := (place.Float64() - 0.5) * d
					dy := (place.Float64() - 0.5) * d * 2 / sqrt3
					if inHexagon(dx, dy, d) && math.Hypot(dx, dy) >= cfg.Channel.MinDistanceM {
						us.x, us.y = g.sites[s].x+dx, g.sites[s].y+dy
						us.edge = math.Hypot(dx, dy) >= 0.8*d/2
						break
					}
				}
				us.pathDB = make([]float64, len(g.sites))
				us.siteLin = make([]float64, len(g.sites))
				for k := range g.sites {
					_, _, dist := g.offset(k, us.x, us.y)
					dist = math.Max(dist, cfg.Channel.MinDistanceM)
					us.pathDB[k] = capturedDB - (cfg.Channel.LossAt1kmDB + 10*cfg.Channel.PathLossExponent*math.Log10(dist/1000))
				}
				us.antLin = make([]float64, C)
				for c := range g.cells {
					dx, dy, _ := g.offset(g.cells[c].site, us.x, us.y)
					us.antLin[c] = math.Pow(10, g.antennaDB(c, dx, dy)/10)
				}
				sh := fading.NewStream(seed, u, 0, streamShadowing)
				us.shadowA = sh.NormFloat64()
				us.shadowB = make([]float64, len(g.sites))
				for k := range us.shadowB {
					us.shadowB[k] = sh.NormFloat64()
				}
				us.shRng = sh
				for l := range us.legs {
					us.legs[l] = -1
				}
				if cfg.Channel.FastFading == FastFadingSlowTowardOthers {
					for l := 0; l < cfg.Handover.MaxActive; l++ {
						ch, err := fading.NewChannel(fading.ChannelConfig{DopplerHz: fdHz, SampleRateHz: rate, Profile: prof}, seed, u*maxLegsPerUser+l)
						if err != nil {
							return nil, loop.Violations{{Field: "groups.speed_kmh", Rule: err.Error()}}
						}
						us.legCh[l] = ch
					}
				}
				us.setTarget(cfg.OuterLoop.InitialTargetDB)
				us.cmds = make([]int8, cfg.InnerLoop.FeedbackDelaySlots+1)
				rp.users = append(rp.users, us)
				u++
			}
		}
	}
	rp.U = len(rp.users)
	U := rp.U
	rp.slow = make([]float64, C*U)
	rp.rx = make([]float64, C)
	rp.own = make([]float64, C)
	rp.fade = make([][]float64, U*maxLegsPerUser)
	if cfg.Channel.FastFading == FastFadingSlowTowardOthers {
		for u := range rp.users {
			for l := 0; l < cfg.Handover.MaxActive; l++ {
				rp.fade[u*maxLegsPerUser+l] = make([]float64, blockSlots)
			}
		}
	}
	if rp.full {
		rp.fullCh = make([]*fading.Channel, C*U)
		rp.fullBuf = make([][]float64, C*U)
		for u, us := range rp.users {
			grp := cfg.Groups[us.group]
			fs, _ := cfg.fingers(us.group)
			prof := fs.Profile
			fdHz := fading.DopplerHz(grp.SpeedKmh, cfg.Channel.CarrierHz)
			for c := 0; c < C; c++ {
				ch, err := fading.NewChannel(fading.ChannelConfig{DopplerHz: fdHz, SampleRateHz: rate, Profile: prof}, seed, u*maxLegsPerUser*64+c)
				if err != nil {
					return nil, loop.Violations{{Field: "groups.speed_kmh", Rule: err.Error()}}
				}
				rp.fullCh[c*U+u] = ch
				rp.fullBuf[c*U+u] = make([]float64, blockSlots)
			}
		}
	}
	rp.stats = newCollector(rp, r)
	return rp, nil
}

// fillFading generates the next n slots of fast fading of every leg in use
// (a leg slot's process advances only while it carries a link: its samples
// stay a stationary Rayleigh process, continued where it stopped).
func (rp *rep) fillFading(n int) {
	if rp.full {
		for i, ch := range rp.fullCh {
			ch.FillGains(rp.fullBuf[i][:n])
		}
		return
	}
	rp.blockN = n
	if rp.fillWork != nil {
		// The helper fills users [U/2, U), this goroutine [0, U/2).
		rp.fillWork <- n
		rp.fillRange(0, rp.U/2, n)
		if pv := <-rp.fillDone; pv != nil {
			panic(pv) // recovered by Run as a PanicError
		}
		return
	}
	rp.fillRange(0, rp.U, n)
}

// fillRange fills the next n slots of the legs in use of users [lo, hi).
func (rp *rep) fillRange(lo, hi, n int) {
	for u := lo; u < hi; u++ {
		us := &rp.users[u]
		for l, ch := range us.legCh {
			if ch != nil && us.legs[l] >= 0 {
				ch.FillGains(rp.fade[u*maxLegsPerUser+l][:n])
			}
		}
	}
}

// startFillHelper starts, for a replication run alone (replications 1,
// else replications already run in parallel) on two or more cores with at
// least 2·minUsersPerFillPart users, a goroutine that fills the second half
// of the users' fading each block. Every leg's channel is its own stream,
// so the samples, and the report, are the same whatever the split
// (determinism across GOMAXPROCS); the channels order the memory. It
// allocates nothing per block. The returned function stops it.
func (rp *rep) startFillHelper() func() {
	if runtime.GOMAXPROCS(0) < 2 || rp.cfg.Run.Replications > 1 || rp.full || rp.U < 2*minUsersPerFillPart {
		return func() {}
	}
	rp.fillWork = make(chan int)
	rp.fillDone = make(chan any)
	go func() {
		for n := range rp.fillWork {
			var pv any
			func() {
				defer func() { pv = recover() }()
				rp.fillRange(rp.U/2, rp.U, n)
			}()
			rp.fillDone <- pv
		}
	}()
	return func() { close(rp.fillWork) }
}

// minUsersPerFillPart is the fewest users per goroutine of fillFading.
const minUsersPerFillPart = 64

// updateSlowGains advances shadowing (Gudmundson AR(1) per part) and
// recomputes every slow gain.
func (rp *rep) updateSlowGains(t int64) {
	rho := rp.cfg.Channel.SiteCorrelation
	a, b := math.Sqrt(rho), math.Sqrt(1-rho)
	U := rp.U
	for u := range rp.users {
		us := &rp.users[u]
		if t > 0 && rp.shadowSD > 0 {
			k := us.shadowK
			w := math.Sqrt(1 - k*k)
			us.shadowA = k*us.shadowA + w*us.shRng.NormFloat64()
			for s := range us.shadowB {
				us.shadowB[s] = k*us.shadowB[s] + w*us.shRng.NormFloat64()
			}
		}
		for s := range us.siteLin {
			us.siteLin[s] = dbToLin(us.pathDB[s] + rp.shadowSD*(a*us.shadowA+b*us.shadowB[s]))
		}
		for c := 0; c < rp.C; c++ {
			rp.slow[c*U+u] = us.siteLin[rp.g.cells[c].site] * us.antLin[c]
		}
		if rp.cfg.OpenLoop.Enabled || t == 0 {
			rp.openLoopEstimate(u, t == 0)
		}
	}
}

// openLoopEstimate records the user's estimate of its best slow gain (dB,
// with the estimation error) and, at start-up, sets the open-loop power.
func (rp *rep) openLoopEstimate(u int, start bool) {
	us := &rp.users[u]
	best := 0.0
	for c := 0; c < rp.C; c++ {
		best = math.Max(best, rp.slow[c*rp.U+u])
	}
	est := 10*math.Log10(best) + rp.cfg.OpenLoop.EstimationErrorDB*us.rng.NormFloat64()
	keep := 1 + rp.cfg.OpenLoop.DelaySlots/rp.cfg.Channel.ShadowingSlots
	if len(us.olEstDB) < keep {
		us.olEstDB = append(us.olEstDB, est)
		for len(us.olEstDB) < keep {
			us.olEstDB = append(us.olEstDB, est)
		}
	} else {
		copy(us.olEstDB, us.olEstDB[1:])
		us.olEstDB[keep-1] = est
	}
	if start {
		us.setP(rp.clamp(math.Pow(10, rp.openLoopDBm(us)/10)))
	}
}

// openLoopDBm is P = target + N0 + assumed rise − 10 log10(W/R) − G_est.
func (rp *rep) openLoopDBm(us *user) float64 {
	return us.targetDB + 10*math.Log10(rp.noiseMW) + rp.cfg.OpenLoop.AssumedNoiseRiseDB - 10*math.Log10(rp.pg) - us.olEstDB[0]
}

func (rp *rep) clamp(p float64) float64 { return math.Min(rp.pmax, math.Max(rp.pmin, p)) }

// updateActiveSets re-evaluates every user's active set from the slow
// gains (events 1A/1B with hysteresis); the first evaluation uses the
// window alone.
func (rp *rep) updateActiveSets(first bool) {
	h := rp.cfg.Handover
	U := rp.U
	if rp.cands == nil {
		rp.cands = make([]cand, rp.C)
		rp.keep = make([]int, 0, maxLegsPerUser)
	}
	cands := rp.cands
	for u := range rp.users {
		us := &rp.users[u]
		for c := 0; c < rp.C; c++ {
			cands[c] = cand{c, rp.slow[c*U+u]}
		}
		slices.SortFunc(cands, func(x, y cand) int {
			if x.g != y.g {
				return cmp.Compare(y.g, x.g)
			}
			return x.c - y.c
		})
		bestDB := 10 * math.Log10(cands[0].g)
		addDB, dropDB := h.WindowDB-h.HysteresisDB/2, h.WindowDB+h.HysteresisDB/2
		if first {
			addDB, dropDB = h.WindowDB, h.WindowDB
		}
		in := func(c int) int {
			for l := 0; l < maxLegsPerUser; l++ {
				if us.legs[l] == c {
					return l
				}
			}
			return -1
		}
		// Drop legs that fell out of the window (the best cell never drops).
		for l := 0; l < maxLegsPerUser; l++ {
			c := us.legs[l]
			if c < 0 || c == cands[0].c {
				continue
			}
			if 10*math.Log10(rp.slow[c*U+u]) < bestDB-dropDB {
				us.legs[l] = -1
			}
		}
		// Keep at most MaxActive: the best cell, then the strongest others
		// within the add window or already in the set and inside the drop window.
		keep := rp.keep[:0]
		for _, cd := range cands {
			if len(keep) == h.MaxActive {
				break
			}
			dB := 10 * math.Log10(cd.g)
			if cd.c == cands[0].c || dB >= bestDB-addDB || (in(cd.c) >= 0 && dB >= bestDB-dropDB) {
				keep = append(keep, cd.c)
			}
		}
		for l := 0; l < maxLegsPerUser; l++ {
			if c := us.legs[l]; c >= 0 {
				found := false
				for _, k := range keep {
					found = found || k == c
				}
				if !found {
					us.legs[l] = -1
				}
			}
		}
		for _, c := range keep {
			if in(c) >= 0 {
				continue
			}
			for l := 0; l < h.MaxActive; l++ {
				if us.legs[l] < 0 {
					us.legs[l] = c
					us.legAcc[l], us.legN[l] = 0, 0
					if ch := us.legCh[l]; ch != nil && rp.blockN > 0 {
						// A leg joining mid-block gets this block's samples now.
						ch.FillGains(rp.fade[u*maxLegsPerUser+l][:rp.blockN])
					}
					break
				}
			}
		}
		us.nLegs = len(keep)
		us.best = cands[0].c
	}
}

// legFade is the fast-fading power gain of leg slot l of user u in slot k
// of the current block.
func (rp *rep) legFade(u, l, k int) float64 {
	switch {
	case rp.full:
		return rp.fullBuf[rp.users[u].legs[l]*rp.U+u][k]
	case rp.fade[u*maxLegsPerUser+l] != nil:
		return rp.fade[u*maxLegsPerUser+l][k]
	}
	return 1
}

// slot runs one slot: received powers, SIRs, commands, the outer loop, the
// statistics and the power update.
func (rp *rep) slot(t int64, k int) {
	U, C := rp.U, rp.C
	p := rp.powers()
	for c := 0; c < C; c++ {
		g := rp.slow[c*U : (c+1)*U]
		s := 0.0
		if rp.full {
			f := rp.fullBuf
			for u, gu := range g {
				s += p[u] * gu * f[c*U+u][k]
			}
		} else {
			for u, gu := range g {
				s += p[u] * gu
			}
		}
		rp.rx[c] = rp.noiseMW + s
		rp.own[c] = 0
	}
	if !rp.full {
		for u := range rp.users {
			us := &rp.users[u]
			for l := 0; l < maxLegsPerUser; l++ {
				if c := us.legs[l]; c >= 0 {
					rp.rx[c] += p[u] * rp.slow[c*U+u] * (rp.legFade(u, l, k) - 1)
				}
			}
		}
	}
	measure := t >= rp.cfg.Run.WarmupSlots
	il := rp.cfg.InnerLoop
	ol := rp.cfg.OuterLoop
	sigma := il.SIREstimationErrorDB * math.Ln10 / 10
	blockEnd := (t+1)%int64(ol.BlockSlots) == 0
	for u := range rp.users {
		us := &rp.users[u]
		bestSIR := 0.0
		allUp := true
		anyOK := false
		for l := 0; l < maxLegsPerUser; l++ {
			c := us.legs[l]
			if c < 0 {
				continue
			}
			sig := p[u] * rp.slow[c*U+u] * rp.legFade(u, l, k)
			if c == us.best {
				rp.own[c] += sig
			}
			sir := rp.pg * sig / fmax(rp.rx[c]-sig, rp.noiseMW)
			bestSIR = fmax(bestSIR, sir)
			us.legAcc[l] += sir
			us.legN[l]++
			if il.Mode == InnerModeClosedLoop {
				m := sir
				if sigma > 0 {
					m *= math.Exp(sigma * us.rng.NormFloat64())
				}
				up := m < us.target
				if il.CommandErrorProb > 0 && us.rng.Float64() < il.CommandErrorProb {
					up = !up
				}
				allUp = allUp && up
			}
			if blockEnd {
				mean := us.legAcc[l] / float64(us.legN[l])
				bler := 1 / (1 + math.Exp((10*math.Log10(mean)-rp.cfg.Link.ThresholdDB)/rp.cfg.Link.SlopeDB))
				if us.rng.Float64() >= bler {
					anyOK = true
				}
				us.legAcc[l], us.legN[l] = 0, 0
			}
		}
		if measure {
			rp.stats.user(u, us, bestSIR, p[u])
		}
		if blockEnd {
			blockErr := !anyOK
			if measure {
				rp.stats.block(blockErr)
			}
			if ol.Enabled && !(ol.FreezeAtMaxPower && p[u] >= rp.pmax) {
				if blockErr {
					us.targetDB += ol.UpStepDB
				} else {
					us.targetDB -= ol.UpStepDB * ol.BLERTarget / (1 - ol.BLERTarget)
				}
				us.setTarget(math.Min(ol.MaxTargetDB, math.Max(ol.MinTargetDB, us.targetDB)))
			}
		}
		// Power of the next slot.
		switch il.Mode {
		case InnerModeIdeal:
			if bestSIR > 0 {
				us.setP(rp.clamp(us.p * us.target / bestSIR))
			}
		default:
			d := len(us.cmds)
			cmd := int8(-1)
			if allUp {
				cmd = 1
			}
			applied := us.cmds[int(t%int64(d))]
			us.cmds[int(t%int64(d))] = cmd
			if d == 1 {
				applied = cmd
			} else if t < int64(d) {
				applied = 0
			}
			rp.applyCommand(us, applied)
		}
	}
	if measure {
		rp.stats.cells(rp)
	}
}

// applyCommand moves the power by one step, without accumulating past the
// limits; with the open loop, the step goes into the closed-loop correction.
func (rp *rep) applyCommand(us *user, cmd int8) {
	if cmd == 0 {
		return
	}
	if rp.cfg.OpenLoop.Enabled {
		base := rp.openLoopDBm(us)
		next := us.olCorrDB + float64(cmd)*rp.cfg.InnerLoop.StepDB
		pDBm := base + next
		if pDBm <= rp.cfg.InnerLoop.MaxPowerDBm && pDBm >= rp.cfg.InnerLoop.MinPowerDBm {
			us.olCorrDB = next
		}
		us.setP(rp.clamp(dbToLin(base + us.olCorrDB)))
		return
	}
	// One step: the dB value follows by ±step_db without a logarithm,
	// exact again at a limit.
	if cmd > 0 {
		if np := us.p * rp.upLin; np < rp.pmax {
			us.p, us.pDB = np, us.pDB+rp.cfg.InnerLoop.StepDB
		} else {
			us.setP(rp.pmax)
		}
	} else {
		if np := us.p * rp.downLin; np > rp.pmin {
			us.p, us.pDB = np, us.pDB-rp.cfg.InnerLoop.StepDB
		} else {
			us.setP(rp.pmin)
		}
	}
}

// setP sets the transmit power in mW and its dBm value pDB.
func (us *user) setP(p float64) {
	us.p = p
	us.pDB = 10 * math.Log10(p)
}

// powers returns the users' transmit powers of this slot (mW) in a reused slice.
func (rp *rep) powers() []float64 {
	if rp.stats.p == nil {
		rp.stats.p = make([]float64, rp.U)
	}
	for u := range rp.users {
		rp.stats.p[u] = rp.users[u].p
	}
	return rp.stats.p
}

// setTarget sets the SIR target in dB and its linear value.
func (us *user) setTarget(db float64) {
	us.targetDB = db
	us.target = dbToLin(db)
}

// fmax and fmin are math.Max and math.Min for the engine's finite values
// (no NaN or signed-zero handling: a plain comparison, cheaper per slot).
func fmax(a, b float64) float64 {
	if a > b {
		return a
	}
	return b
}

func fmin(a, b float64) float64 {
	if a < b {
		return a
	}
	return b
}

// dbToLin is 10^(x/10).
func dbToLin(x float64) float64 { return math.Exp(x * (math.Ln10 / 10)) }
