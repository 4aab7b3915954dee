package multicell

import "math"

// updateSlowGains advances shadowing to slot t and recomputes every slow
// gain in place (gainsInto, then afterGains).
func (rp *rep) updateSlowGains(t int64) {
	rp.gainsInto(rp.slow, t)
	rp.afterGains(t)
}

// gainsInto advances shadowing (Gudmundson AR(1) per part; none at t = 0)
// and writes every slow gain into dst (user-major, like rep.slow),
// 10^(dB/10) by linFromDB (within 2.5e-7 dB). It touches only the users'
// shadowing state and dst, so it may run on the helper while the slots run.
func (rp *rep) gainsInto(dst []float64, t int64) { rp.gainsRange(dst, t, 0, rp.U) }

// gainsRange is gainsInto for users lo..hi−1 (each user's shadowing is its
// own: the ranges may run in any order, on either goroutine).
func (rp *rep) gainsRange(dst []float64, t int64, lo, hi int) {
	rho := rp.cfg.Channel.SiteCorrelation
	a, b := math.Sqrt(rho), math.Sqrt(1-rho)
	C := rp.C
	for u := lo; u < hi; u++ {
		us := &rp.users[u]
		sdB := rp.shadowSD * b
		if t > 0 && rp.shadowSD > 0 {
			k := us.shadowK
			w := math.Sqrt(1 - k*k)
			var draws [maxSites + 4]float64 // the common part's, then each site's (and room for whole groups of four)
			nd := draws[:1+len(us.shadowB)]
			us.sh.NormFill(nd)
			us.shadowA = k*us.shadowA + w*nd[0]
			shadowSites(us.shadowB, draws[1:], us.pathDB, us.siteLin, k, w, rp.shadowSD*a*us.shadowA, sdB)
		} else {
			common := rp.shadowSD * a * us.shadowA
			for s := range us.siteLin {
				us.siteLin[s] = us.pathDB[s] + common + sdB*us.shadowB[s]
			}
		}
		// Converted in whole groups of four (the AVX2 loop's; the
		// padding holds finite values).
		linFromDBInPlace(us.siteLin[:cap(us.siteLin)])
		// Cells are site-major (cell site·S + sector, newGeometry).
		row := dst[u*C : u*C+C]
		ant := us.antLin[:len(row)]
		if S := C / len(us.siteLin); S == 3 {
			rows3(row, ant, us.siteLin)
		} else {
			for s, g := range us.siteLin {
				for c := s * S; c < (s+1)*S; c++ {
					row[c] = g * ant[c]
				}
			}
		}
	}
}

// shadowSitesGo advances each site's shadowing part b[i] = k·b[i] + w·nd[i]
// (Gudmundson AR(1)) and sets the site's slow gain in dB, site[i] =
// path[i] + common + sdB·b[i], for i < len(b). shadowSites runs it in AVX
// where it can (the same bits).
func shadowSitesGo(b, nd, path, site []float64, k, w, common, sdB float64) {
	for s := range b {
		b[s] = k*b[s] + w*nd[s]
	}
	for s := range site[:len(b)] {
		site[s] = path[s] + common + sdB*b[s]
	}
}

// rows3Go sets row[3s+i] = g[s]·ant[3s+i] (a 3-sector layout's slow gains
// of one user from its site and antenna gains). rows3 runs it in assembly
// where it can (the same bits).
func rows3Go(row, ant, g []float64) {
	for s, g := range g {
		r, a := row[3*s:3*s+3], ant[3*s:3*s+3]
		r[0], r[1], r[2] = g*a[0], g*a[1], g*a[2]
	}
}

// afterGains follows new slow gains at slot t: the legs' copies, the
// open-loop estimate, and a full recomputation of the cell sums.
func (rp *rep) afterGains(t int64) {
	C := rp.C
	if rp.legs.dirty {
		for u := range rp.users {
			rp.refreshLegs(&rp.users[u], rp.slow[u*C:u*C+C])
		}
	} else {
		// The legs are as listed: only their gains change, in the list
		// (the users' copies are refreshed with the next active-set
		// update, before the list is built again from them).
		for i := range rp.legs.e {
			e := &rp.legs.e[i]
			e.g = rp.slow[int(e.u)*C+int(e.c)]
		}
	}
	if rp.cfg.OpenLoop.Enabled || t == 0 {
		for u := range rp.users {
			rp.openLoopEstimate(u, t == 0)
		}
		rp.suReady = false // a start-up power may have been set
	}
	rp.stale = true
}

// refreshLegs copies the slow gains of the user's legs from its row of
// slow and lists the leg slots in use (act, ascending). Only the first
// max_active leg slots are ever used (updateActiveSets).
func (rp *rep) refreshLegs(us *user, row []float64) {
	n := 0
	for l, c := range us.legs[:rp.cfg.Handover.MaxActive] {
		if c >= 0 {
			us.leg[l].c, us.leg[l].g = c, row[c]
			us.act[n] = int8(l)
			n++
		}
	}
	us.nLegs = int32(n)
	rp.legs.dirty = true
}

// openLoopEstimate records the user's estimate of its best slow gain (dB,
// with the estimation error) and, at start-up, sets the open-loop power.
func (rp *rep) openLoopEstimate(u int, start bool) {
	us := &rp.users[u]
	best := 0.0
	for _, g := range rp.slow[u*rp.C : (u+1)*rp.C] {
		best = math.Max(best, g)
	}
	est := 10*math.Log10(best) + rp.cfg.OpenLoop.EstimationErrorDB*us.ctl.Norm()
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
