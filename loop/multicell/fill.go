package multicell

import (
	"context"

	"github.com/fadeloop/fadeloop/fading"
)

// The replication's work ahead of the slots — the fast fading of the next
// block, the slow gains of the next shadowing update, the statistics of
// the last block — does not depend on the powers, so it runs beside the
// slots: jobs cut into chunks (share.go) that a helper goroutine takes
// while the replication's goroutine runs the slots, and that the
// replication's goroutine finishes itself when it needs a result the
// helper has not finished (hand-offs per block and per shadowing update,
// never per slot). Without a helper the same jobs run when posted. Each
// chunk's result does not depend on where or when it runs (each leg and
// each user has its own random streams; the statistics run in block
// order on one goroutine at a time): the report is identical whatever
// GOMAXPROCS is (tested).
//
// Blocks end at active-set updates, so the legs in use are fixed within a
// block. The fading of block b+1 is generated for the legs in use during
// block b; a leg that joins at the start of block b+1 gets its samples
// then (updateActiveSets). Every leg's stream runs on the slot clock: the
// gain in slot t is sample t of its channel, whether the leg stayed, left
// or rejoined (fillLeg skips an unused leg ahead; TestLegStreamsOnSlotClock).
// A stream belongs to the user's leg slot, not to a cell: when one update
// moves a slot from cell X to cell Y, Y's first samples continue X's
// process (same distribution, independent of the user's other legs; only
// the first few samples after the switch are correlated with X's last).

// fillJoiners fills this block's fading of the leg slots that joined at
// its start (rep.joiners), shared with the helper when there is one (each
// leg its own channel: the same samples either way).
func (rp *rep) fillJoiners() {
	if len(rp.joiners) == 0 {
		return
	}
	j := &rp.jobs.join
	j.chunks = (len(rp.joiners) + chunkLegs - 1) / chunkLegs
	rp.post(j)
	rp.complete(j)
}

// fillLeg writes the fading of user u's leg slot l for the n slots from
// slot t0 into fade set fade, on goroutine who (legAt: on the slot
// clock).
func (rp *rep) fillLeg(fade []float64, u, l int, t0 int64, n, who int) {
	j, ch := rp.legAt(u, l, t0)
	tmp := rp.fadeTmp[who][:n]
	ch.FillGainsShared(tmp, &rp.plans[who])
	rp.legPos[j] = t0 + int64(n)
	rp.spread(fade, j, tmp)
}

// fillPair is fillLeg for user u's leg slot l and user v's leg slot m in
// one pass (fading.FillGainsPair: the weights of a shared interpolation
// plan loaded once for both; each leg's samples the same bits as
// fillLeg's).
func (rp *rep) fillPair(fade []float64, u, l, v, m int, t0 int64, n, who int) {
	j, a := rp.legAt(u, l, t0)
	k, b := rp.legAt(v, m, t0)
	tmp := rp.fadeTmp[who]
	fading.FillGainsPair(tmp[:n], tmp[n:2*n], a, b, &rp.plans[who])
	rp.legPos[j], rp.legPos[k] = t0+int64(n), t0+int64(n)
	rp.spread(fade, j, tmp[:n])
	rp.spread(fade, k, tmp[n:2*n])
}

// legAt returns user u's leg slot l's index u·max_active + l and its
// channel, advanced to slot t0. The leg's stream runs on the slot clock:
// a leg out of the active set since its last samples is first advanced to
// t0 (fading.Channel.Skip, no samples generated), so a leg that rejoins
// continues its process where time has taken it, and the legs of users of
// the same speed are at the same point of their streams and share
// interpolation plans (rep.plans).
func (rp *rep) legAt(u, l int, t0 int64) (int, *fading.Channel) {
	j := u*rp.legsPerUser + l
	ch := rp.users[u].legCh[l]
	switch d := t0 - rp.legPos[j]; {
	case d > 0:
		ch.Skip(int(d))
	case d < 0:
		panic("multicell: a leg's stream is past the block it is filled for") // programmer error: the slot clock would break
	}
	return j, ch
}

// blockLen is the length of the block starting at slot t0: blockSlots,
// cut at the end of the run and at the next active-set update.
func (rp *rep) blockLen(t0 int64) int {
	upd := int64(rp.cfg.Handover.UpdateSlots)
	return int(min(int64(blockSlots), rp.cfg.Run.Slots-t0, upd-t0%upd))
}

// run runs every slot of the replication, checking ctx between blocks.
// afterSlot, when set (tests), is called after each slot.
//
// Work ahead, per block b: the fading of block b+1 (posted at b's start,
// completed at b+1's), the statistics of block b−1 (posted at b's start,
// after that fading, so the helper does the fading first; the record
// ring holds three blocks), and at each shadowing update the gains of the
// next one.
func (rp *rep) run(ctx context.Context) error {
	total := rp.cfg.Run.Slots
	shadow := int64(rp.cfg.Channel.ShadowingSlots)
	upd := int64(rp.cfg.Handover.UpdateSlots)
	cur := 0
	b := 0 // block number
	// Jobs in flight end before run returns: completed after the last
	// slot, abandoned (chunks not started are dropped, running ones waited
	// for) when run returns early or panics.
	finished := false
	defer func() { rp.endJobs(!finished) }()
	for t0 := int64(0); t0 < total; {
		if err := ctx.Err(); err != nil {
			return err
		}
		n := rp.blockLen(t0)
		if t0 > 0 && !rp.full {
			rp.complete(&rp.jobs.fill)
		}
		rp.fade, rp.blockT0, rp.blockN = rp.fadeSets[cur], t0, n
		if rp.full {
			for i, ch := range rp.fullCh {
				ch.FillGains(rp.fullBuf[i][:n])
			}
		}
		for k := 0; k < n; k++ {
			t := t0 + int64(k)
			if t%shadow == 0 {
				if t == 0 {
					rp.gainsInto(rp.slow, 0)
				} else {
					rp.complete(&rp.jobs.gains)
					rp.slow, rp.slowNext = rp.slowNext, rp.slow
				}
				rp.afterGains(t)
			}
			if k == 0 && t%upd == 0 {
				rp.updateActiveSets(t == 0)
				rp.fillJoiners()
			}
			if t%shadow == 0 && t+shadow < total {
				j := &rp.jobs.gains
				j.t, j.chunks = t+shadow, (rp.U+chunkUsers-1)/chunkUsers
				rp.post(j)
			}
			if k == 0 {
				// This block's record: the ring's slot of block b−3, whose
				// statistics were posted at block b−2's start.
				st := &rp.jobs.stats[b%len(rp.recs)]
				rp.complete(st)
				rp.rec = rp.recs[b%len(rp.recs)]
				rp.rec.start(rp, t0, n)
				if next := t0 + int64(n); next < total && !rp.full {
					j := &rp.jobs.fill
					j.set, j.t, j.n, j.chunks = 1-cur, next, rp.blockLen(next), (rp.U+chunkUsers-1)/chunkUsers
					rp.post(j)
				}
				if b > 0 {
					rp.postStats(b - 1)
				}
			}
			rp.slot(t, k)
			if rp.afterSlot != nil {
				rp.afterSlot(t)
			}
		}
		cur = 1 - cur
		t0 += int64(n)
		b++
	}
	if b > 0 {
		rp.postStats(b - 1)
	}
	finished = true
	return nil
}

// postStats posts the statistics of block b (its record, rep.recs[b mod 3]).
func (rp *rep) postStats(b int) {
	j := &rp.jobs.stats[b%len(rp.recs)]
	j.set, j.chunks = b%len(rp.recs), 1
	rp.post(j)
}

// fillSet fills fade set s with the n slots from slot t0 of the legs in
// use of users lo..hi−1, on goroutine who.
func (rp *rep) fillSet(s int, t0 int64, n, lo, hi, who int) {
	fade := rp.fadeSets[s]
	// The legs in use, in user and leg order (fillListed).
	list := rp.fillList[who][:0]
	for u := lo; u < hi; u++ {
		us := &rp.users[u]
		for l, ch := range us.legCh {
			if ch != nil && us.legs[l] >= 0 {
				list = append(list, int32(u*maxLegsPerUser+l))
			}
		}
	}
	rp.fillList[who] = list
	rp.fillListed(fade, list, t0, n, who)
}

// fillListed fills the n slots from slot t0 of the leg slots in list
// (u·maxLegsPerUser + l) into fade set fade, on goroutine who, two at a
// time (fillPair; the pairing does not change any leg's samples). Each
// leg's channel is cold in cache among thousands: the channels two pairs
// ahead are asked for (PrefetchState), then one pair ahead their samples
// (PrefetchSamples), hints only.
func (rp *rep) fillListed(fade []float64, list []int32, t0 int64, n, who int) {
	ch := func(i int) *fading.Channel { return rp.users[list[i]/maxLegsPerUser].legCh[list[i]%maxLegsPerUser] }
	for i := 0; i < min(4, len(list)); i++ {
		ch(i).PrefetchState()
	}
	for i := 0; i < len(list); i += 2 {
		for k := i + 4; k < min(i+6, len(list)); k++ {
			ch(k).PrefetchState()
		}
		for k := i + 2; k < min(i+4, len(list)); k++ {
			ch(k).PrefetchSamples(n)
		}
		u, l := int(list[i])/maxLegsPerUser, int(list[i])%maxLegsPerUser
		if i+1 < len(list) {
			v, m := int(list[i+1])/maxLegsPerUser, int(list[i+1])%maxLegsPerUser
			rp.fillPair(fade, u, l, v, m, t0, n, who)
		} else {
			rp.fillLeg(fade, u, l, t0, n, who)
		}
	}
}

// spread writes one leg slot's samples (column j of the slot-major fade
// set) from g.
func (rp *rep) spread(fade []float64, j int, g []float64) {
	st := rp.fadeStride
	for k, x := range g {
		fade[k*st+j] = x
	}
}
