package multicell

import (
	"context"
	"runtime"
)

// The replication's work ahead of the slots — the fast fading of the next
// block and the slow gains of the next shadowing update — does not depend
// on the powers, so a helper goroutine computes it while the replication's
// goroutine runs the slots (one hand-off per block and per shadowing
// update, never per slot). Without a helper the same jobs run at the same
// points on the replication's goroutine, in the same order: the report is
// identical whatever GOMAXPROCS is (tested).
//
// Blocks end at active-set updates, so the legs in use are fixed within a
// block. The fading of block b+1 is generated for the legs in use during
// block b; a leg that joins at the start of block b+1 gets its samples
// then (updateActiveSets), a leg that leaves has had its process advance
// by one unused block (still a stationary Rayleigh process, continued).

// jobKind names a piece of work ahead of the slots.
type jobKind uint8

const (
	jobFill  jobKind = iota // fading of the next block into the other fade set
	jobGains                // slow gains of the next shadowing update into slowNext
	jobJoin                 // fading of this block for the second half of the joining legs
	jobStats                // the statistics of a finished block (record.go)
	jobKinds
)

// job is one piece of work ahead.
type job struct {
	kind jobKind
	set  int   // jobFill: fade set to fill; jobStats: record to sum up
	n    int   // jobFill: slots
	t    int64 // jobGains: slot of the shadowing update
}

// done reports a finished job and the panic value of its run, if any.
type done struct {
	kind jobKind
	pv   any
}

// helper is the goroutine that runs jobs in the order given.
type helper struct {
	work chan job
	done chan done
}

// doJob runs j.
func (rp *rep) doJob(j job) {
	switch j.kind {
	case jobFill:
		rp.fillSet(j.set, j.n)
	case jobGains:
		rp.gainsInto(rp.slowNext, j.t)
	case jobJoin:
		rp.fillLegs(rp.joiners[len(rp.joiners)/2:], rp.fadeTmp[1])
	case jobStats:
		rp.stats.addBlock(rp, rp.recs[j.set])
	}
}

// fillJoiners fills this block's fading of the leg slots that joined at
// its start (rep.joiners), the second half on the helper when there is one
// (each leg its own channel: the same samples either way).
func (rp *rep) fillJoiners() {
	if rp.helper == nil || len(rp.joiners) < 2 {
		rp.fillLegs(rp.joiners, rp.fadeTmp[0])
		return
	}
	rp.enqueue(job{kind: jobJoin})
	rp.fillLegs(rp.joiners[:len(rp.joiners)/2], rp.fadeTmp[0])
	rp.waitFor(jobJoin)
}

// fillLegs fills this block's fading of leg slots i = u·maxLegsPerUser + l.
// tmp is the calling goroutine's scratch (rep.fadeTmp).
func (rp *rep) fillLegs(legs []int, tmp []float64) {
	tmp = tmp[:rp.blockN]
	for _, i := range legs {
		u, l := i/maxLegsPerUser, i%maxLegsPerUser
		rp.users[u].legCh[l].FillGains(tmp)
		rp.spread(rp.fade, u*rp.legsPerUser+l, tmp)
	}
}

// enqueue starts j on the helper, or runs it now without one.
func (rp *rep) enqueue(j job) {
	if rp.helper == nil {
		rp.doJob(j)
		rp.finished[j.kind] = true
		return
	}
	rp.outstanding++
	rp.helper.work <- j
}

// waitFor waits until the job of kind k last enqueued has finished (the
// jobs before it finish first) and re-raises a panic of the helper.
func (rp *rep) waitFor(k jobKind) {
	for !rp.finished[k] {
		d := <-rp.helper.done
		rp.outstanding--
		if d.pv != nil {
			panic(d.pv) // recovered by Run as a PanicError
		}
		rp.finished[d.kind] = true
	}
	rp.finished[k] = false
}

// drain waits for every job still running (before returning early).
func (rp *rep) drain() {
	for rp.outstanding > 0 {
		<-rp.helper.done
		rp.outstanding--
	}
}

// startHelper starts, for a replication run alone (replications 1, else
// replications already run in parallel) on two or more cores, the helper
// goroutine. It allocates nothing per job. The returned function stops it.
func (rp *rep) startHelper() func() {
	if runtime.GOMAXPROCS(0) < 2 || rp.cfg.Run.Replications > 1 || rp.U < minUsersForHelper {
		return func() {}
	}
	h := &helper{work: make(chan job, jobKinds), done: make(chan done, jobKinds)}
	rp.helper = h
	go func() {
		for j := range h.work {
			var pv any
			func() {
				defer func() { pv = recover() }()
				rp.doJob(j)
			}()
			h.done <- done{j.kind, pv}
		}
	}()
	return func() { close(h.work); rp.helper = nil }
}

// minUsersForHelper is the fewest users for which a helper pays.
const minUsersForHelper = 128

// blockLen is the length of the block starting at slot t0: blockSlots,
// cut at the end of the run and at the next active-set update.
func (rp *rep) blockLen(t0 int64) int {
	upd := int64(rp.cfg.Handover.UpdateSlots)
	return int(min(int64(blockSlots), rp.cfg.Run.Slots-t0, upd-t0%upd))
}

// run runs every slot of the replication, checking ctx between blocks.
// afterSlot, when set (tests), is called after each slot.
func (rp *rep) run(ctx context.Context) error {
	total := rp.cfg.Run.Slots
	shadow := int64(rp.cfg.Channel.ShadowingSlots)
	upd := int64(rp.cfg.Handover.UpdateSlots)
	cur := 0
	statsPending := false
	for t0 := int64(0); t0 < total; {
		if err := ctx.Err(); err != nil {
			if rp.helper != nil {
				rp.drain()
			}
			return err
		}
		n := rp.blockLen(t0)
		if t0 > 0 && !rp.full {
			rp.waitFor(jobFill)
		}
		rp.fade, rp.blockN = rp.fadeSets[cur], n
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
					rp.waitFor(jobGains)
					rp.slow, rp.slowNext = rp.slowNext, rp.slow
				}
				rp.afterGains(t)
			}
			if k == 0 && t%upd == 0 {
				rp.updateActiveSets(t == 0)
				rp.fillJoiners() // the helper is free here when update_slots is a multiple of shadowing_slots
			}
			if k == 0 {
				// The record of two blocks ago, this buffer's, was summed up
				// (at most one jobStats is outstanding: see below).
				rp.rec = rp.recs[cur]
				rp.rec.start(rp, t0, n)
			}
			if t%shadow == 0 && t+shadow < total {
				rp.enqueue(job{kind: jobGains, t: t + shadow})
			}
			if k == 0 {
				if next := t0 + int64(n); next < total && !rp.full {
					rp.enqueue(job{kind: jobFill, set: 1 - cur, n: rp.blockLen(next)})
				}
			}
			rp.slot(t, k)
			if rp.afterSlot != nil {
				rp.afterSlot(t)
			}
		}
		// The block's statistics: after the last block's (one outstanding
		// at a time, so the record written next is free).
		if statsPending {
			rp.waitFor(jobStats)
		}
		rp.enqueue(job{kind: jobStats, set: cur})
		statsPending = true
		cur = 1 - cur
		t0 += int64(n)
	}
	if statsPending {
		rp.waitFor(jobStats)
	}
	return nil
}

// fillSet fills fade set s with the next n slots of the legs in use.
func (rp *rep) fillSet(s, n int) {
	fade := rp.fadeSets[s]
	tmp := rp.fadeTmp[1][:n] // jobs' scratch
	for u := range rp.users {
		us := &rp.users[u]
		for l, ch := range us.legCh {
			if ch != nil && us.legs[l] >= 0 {
				ch.FillGains(tmp)
				rp.spread(fade, u*rp.legsPerUser+l, tmp)
			}
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
