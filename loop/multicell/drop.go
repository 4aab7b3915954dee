package multicell

import (
	"math"
	"runtime"
	"sync"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
)

// newRep drops the users of replication r (seed: the replication's) with
// their path losses, antenna gains, shadowing state and fading channels.
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
	// Per group: profile, captured fraction, Doppler, shadowing AR(1)
	// coefficient; per user: its group and site, in drop order.
	type groupDrop struct {
		prof       fading.Profile
		capturedDB float64
		fdHz, k    float64
	}
	gd := make([]groupDrop, len(cfg.Groups))
	type slot struct{ g, s int }
	var order []slot
	for gi, grp := range cfg.Groups {
		fs, err := cfg.fingers(gi)
		if err != nil {
			return nil, loop.Violations{{Field: "groups.profile", Rule: err.Error()}}
		}
		gd[gi].prof = fs.Profile
		if fs.CapturedFraction > 0 && fs.CapturedFraction < 1 {
			gd[gi].capturedDB = 10 * math.Log10(fs.CapturedFraction)
		}
		gd[gi].fdHz = fading.DopplerHz(grp.SpeedKmh, cfg.Channel.CarrierHz)
		gd[gi].k = math.Exp(-grp.SpeedKmh / 3.6 * float64(cfg.Channel.ShadowingSlots) / rate / cfg.Channel.DecorrelationM)
		for s := range g.sites {
			for j := 0; j < grp.CountPerCell*cfg.Layout.SectorsPerSite; j++ {
				order = append(order, slot{gi, s})
			}
		}
	}
	// Each user draws from its own streams: users are dropped in any
	// order, on two goroutines for a large layout run alone (as the
	// helper would be), with the same result.
	rp.users = make([]user, len(order))
	// Every user's per-site and per-cell arrays in one slab, user after
	// user (path loss, shadowing parts, site gains, each padded to whole
	// groups of four, then antenna gains): a shadowing update streams
	// through it instead of visiting small allocations across the heap.
	nSites, n4 := len(g.sites), (len(g.sites)+3)&^3
	perUser := 3*n4 + C
	slab := make([]float64, len(order)*perUser)
	drop := func(u int) error {
		mine := slab[u*perUser : (u+1)*perUser]
		gi, s := order[u].g, order[u].s
		us := user{group: gi, ctl: fading.NewFastStream(seed, u, 0, streamControl), shadowK: gd[gi].k}
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
		us.pathDB = mine[0:nSites:n4]                // room for whole groups of four (shadowSites)
		us.siteLin = mine[2*n4 : 2*n4+nSites : 3*n4] // room for whole groups of four (gainsRange)
		for k := range g.sites {
			_, _, dist := g.offset(k, us.x, us.y)
			dist = math.Max(dist, cfg.Channel.MinDistanceM)
			us.pathDB[k] = gd[gi].capturedDB - (cfg.Channel.LossAt1kmDB + 10*cfg.Channel.PathLossExponent*math.Log10(dist/1000))
		}
		us.antLin = mine[3*n4 : 3*n4+C : 3*n4+C]
		for c := range g.cells {
			dx, dy, _ := g.offset(g.cells[c].site, us.x, us.y)
			us.antLin[c] = math.Pow(10, g.antennaDB(c, dx, dy)/10)
		}
		us.sh = fading.NewFastStream(seed, u, 0, streamShadowing)
		us.shadowA = us.sh.Norm()
		us.shadowB = mine[n4 : n4+nSites : 2*n4]
		for k := range us.shadowB {
			us.shadowB[k] = us.sh.Norm()
		}
		for l := range us.legs {
			us.legs[l] = -1
		}
		if cfg.Channel.FastFading == FastFadingSlowTowardOthers {
			for l := 0; l < cfg.Handover.MaxActive; l++ {
				ch, err := fading.NewChannel(fading.ChannelConfig{DopplerHz: gd[gi].fdHz, SampleRateHz: rate, Profile: gd[gi].prof}, seed, u*maxLegsPerUser+l)
				if err != nil {
					return loop.Violations{{Field: "groups.speed_kmh", Rule: err.Error()}}
				}
				us.legCh[l] = ch
			}
		}
		us.setTarget(cfg.OuterLoop.InitialTargetDB)
		rp.users[u] = us
		return nil
	}
	dropRange := func(lo, hi int) error {
		for u := lo; u < hi; u++ {
			if err := drop(u); err != nil {
				return err
			}
		}
		return nil
	}
	var errs [2]error
	if half := len(order) / 2; runtime.GOMAXPROCS(0) >= 2 && cfg.Run.Replications == 1 && len(order) >= minUsersForHelper {
		var wg sync.WaitGroup
		wg.Add(1)
		go func() {
			defer wg.Done()
			defer func() {
				if p := recover(); p != nil {
					errs[1] = loop.NewPanicError(p)
				}
			}()
			errs[1] = dropRange(half, len(order))
		}()
		func() {
			defer wg.Wait() // also when this half panics: nothing runs on after newRep
			errs[0] = dropRange(0, half)
		}()
	} else {
		errs[0] = dropRange(0, len(order))
	}
	for _, err := range errs {
		if err != nil {
			return nil, err // the first user's error in drop order
		}
	}
	rp.U = len(rp.users)
	U := rp.U
	rp.slow = make([]float64, C*U)
	rp.rx = make([]float64, C)
	rp.own = make([]float64, C)
	rp.sums = make([]float64, C)
	rp.corr = make([]float64, C)
	rp.corrNext = make([]float64, C)
	rp.pPrev = make([]float64, U)
	rp.pCur = make([]float64, U)
	rp.movers, rp.moverD, rp.pFull = make([]int32, U), make([]float64, U), make([]float64, U)
	ma := cfg.Handover.MaxActive
	rp.legSIR, rp.legAcc, rp.legN = make([]float64, U*ma), make([]float64, U*ma), make([]int32, U*ma)
	rp.slotU = make([]userSlot, U)
	rp.legBLER = make([]float64, U*ma)
	rp.legF = make([]float64, U*ma)
	for i := range rp.legF {
		rp.legF[i] = 1
	}
	rp.legs = newLegList(U * ma)
	rp.cmds = make([]int8, U*(cfg.InnerLoop.FeedbackDelaySlots+1))
	rp.stale = true
	rp.slowNext = make([]float64, C*U)
	rp.joiners = make([]int32, 0, U*cfg.Handover.MaxActive) // never grows: no allocation per update
	rp.fadeTmp = [2][]float64{make([]float64, 2*blockSlots), make([]float64, 2*blockSlots)}
	rp.fillList = [2][]int32{make([]int32, 0, chunkUsers*maxLegsPerUser), make([]int32, 0, chunkUsers*maxLegsPerUser)}
	if cfg.Channel.FastFading == FastFadingSlowTowardOthers {
		// Slot-major: slot k's gains of every leg slot side by side, in
		// the order the slot loop reads them.
		rp.legsPerUser = cfg.Handover.MaxActive
		rp.fadeStride = U * rp.legsPerUser
		rp.legPos = make([]int64, rp.fadeStride)
		for s := range rp.fadeSets {
			rp.fadeSets[s] = make([]float64, blockSlots*rp.fadeStride)
		}
		rp.fade = rp.fadeSets[0]
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
	rp.marginLin = math.Pow(10, -cfg.Run.OutageMarginDB/10)
	rp.edge = make([]float64, U)
	for u, us := range rp.users {
		if us.edge {
			rp.edge[u] = 1
		}
	}
	rp.recs = [3]*blockRec{newBlockRec(U, C), newBlockRec(U, C), newBlockRec(U, C)}
	rp.jobs.fill.kind, rp.jobs.gains.kind, rp.jobs.join.kind = jobFill, jobGains, jobJoin
	for i := range rp.jobs.stats {
		rp.jobs.stats[i].kind = jobStats
	}
	for _, j := range rp.jobs.all() {
		j.wake = make(chan struct{}, 1)
	}
	rp.rec = rp.recs[0]
	return rp, nil
}
