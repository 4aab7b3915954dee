package multicell

import (
	"runtime"
	"sync/atomic"
)

// Jobs shared between the replication's goroutine and its helper
// (fill.go). A job is cut into chunks; whoever claims a chunk (an atomic
// compare-and-swap on the job's state: generation and next chunk) runs
// it. The helper takes the jobs in the order posted; the replication's
// goroutine, when it needs a job's result, claims the chunks left and
// waits for the ones running. The statistics are one chunk that only the
// helper runs, in the order posted (their posts always queue, so blocks
// are summed in order), unless there is no helper. A job is posted again
// only after it completed, with a new generation: a stale queue entry
// claims nothing.

// Chunk sizes: users per chunk of the fading and gains jobs, joining legs
// per chunk of the join job (tens of microseconds of work each).
const (
	chunkUsers = 32
	chunkLegs  = 32
)

// jobKind names a piece of work ahead of the slots.
type jobKind uint8

const (
	jobFill  jobKind = iota // fading of the next block into the other fade set
	jobGains                // slow gains of the next shadowing update into slowNext
	jobJoin                 // fading of this block for the joining legs
	jobStats                // the statistics of a finished block (record.go)
)

// job is one piece of work ahead. Its parameters are set by the
// replication's goroutine before post and read by chunks, which run only
// between post and complete.
type job struct {
	kind   jobKind
	set, n int   // jobFill: fade set and slots; jobStats: record
	t      int64 // jobGains: slot of the shadowing update
	chunks int
	gen    uint32 // the generation posted (replication's goroutine only)

	state  atomic.Uint64 // generation<<32 | next chunk to claim
	total  atomic.Int64  // chunks of this generation (read by the helper)
	fin    atomic.Int64  // chunks finished in this generation
	pv     atomic.Pointer[panicValue]
	posted bool // posted and not yet completed (replication's goroutine only)

	// waiting: the replication's goroutine sleeps on wake until the last
	// chunk finishes (a stale token only makes it check again).
	waiting atomic.Bool
	wake    chan struct{}
}

// finish counts a finished chunk and wakes a waiting complete after the
// last one.
func (j *job) finish() {
	if j.fin.Add(1) >= j.total.Load() && j.waiting.Load() {
		select {
		case j.wake <- struct{}{}:
		default:
		}
	}
}

// panicValue is a chunk's panic on the helper, re-raised by complete.
type panicValue struct{ v any }

// jobs are the replication's job instances (one of each in flight; the
// statistics one per record of the ring).
type jobs struct {
	fill, gains, join job
	stats             [3]job
	gen               uint32
}

// all lists the job instances; the statistics in ring order.
func (js *jobs) all() [6]*job {
	return [6]*job{&js.fill, &js.gains, &js.join, &js.stats[0], &js.stats[1], &js.stats[2]}
}

// entry is a posted job in the helper's queue.
type entry struct {
	j   *job
	gen uint32
}

// helper is the goroutine that runs posted jobs' chunks.
type helper struct {
	work   chan entry
	exited chan struct{} // closed when the goroutine has returned
}

// helperQueue bounds the helper's queue; a post that finds it full is
// left to the replication's goroutine (complete runs its chunks), except
// the statistics', which wait for room. A variable for tests.
var helperQueue = 16

// post starts j: on the helper's queue, or now without a helper.
func (rp *rep) post(j *job) {
	if j.posted {
		panic("multicell: job posted twice") // programmer error: complete it first
	}
	rp.jobs.gen++
	g := rp.jobs.gen
	j.gen = g
	j.posted = true
	j.pv.Store(nil)
	j.fin.Store(0)
	j.total.Store(int64(j.chunks))
	j.state.Store(uint64(g) << 32)
	if rp.helper == nil {
		rp.runClaims(j, g, rp.fadeTmp[0])
		return
	}
	if j.kind == jobStats {
		rp.helper.work <- entry{j, g} // in order, never left out
		return
	}
	select {
	case rp.helper.work <- entry{j, g}:
	default:
	}
}

// runClaims runs the chunks of generation g of j that it can claim.
func (rp *rep) runClaims(j *job, g uint32, tmp []float64) {
	for {
		v := j.state.Load()
		if uint32(v>>32) != g || int64(uint32(v)) >= j.total.Load() {
			return
		}
		if !j.state.CompareAndSwap(v, v+1) {
			continue
		}
		rp.runChunk(j, int(uint32(v)), tmp)
		j.finish()
	}
}

// complete returns when every chunk of j has run (running the chunks
// left, except the statistics', which the helper runs in order), and
// re-raises a chunk's panic. A job not posted is complete.
func (rp *rep) complete(j *job) {
	if !j.posted {
		return
	}
	j.posted = false
	if rp.helper == nil {
		return // ran when posted
	}
	if j.kind != jobStats {
		rp.runClaims(j, j.gen, rp.fadeTmp[0])
	}
	// The helper is at most a chunk away (or, for the statistics, a few
	// jobs): a short spin, then sleep until its last chunk finishes.
	for spins := 0; j.fin.Load() < int64(j.chunks); spins++ {
		if spins < 20 {
			runtime.Gosched()
			continue
		}
		j.waiting.Store(true)
		if j.fin.Load() < int64(j.chunks) {
			<-j.wake
		}
		j.waiting.Store(false)
	}
	if p := j.pv.Load(); p != nil {
		panic(p.v) // recovered by Run as a PanicError
	}
}

// completeAll completes every job in flight (before the replication
// returns, so the helper no longer touches it).
func (rp *rep) completeAll() {
	for _, j := range rp.jobs.all() {
		rp.complete(j)
	}
}

// chunkHook, when set (tests), is called before each chunk runs.
var chunkHook func(kind jobKind, onHelper bool)

// runChunk runs chunk i of j with the calling goroutine's scratch tmp.
func (rp *rep) runChunk(j *job, i int, tmp []float64) {
	if chunkHook != nil {
		chunkHook(j.kind, &tmp[0] == &rp.fadeTmp[1][0])
	}
	switch j.kind {
	case jobFill:
		lo := i * chunkUsers
		rp.fillSet(j.set, j.n, lo, min(rp.U, lo+chunkUsers), tmp)
	case jobGains:
		lo := i * chunkUsers
		rp.gainsRange(rp.slowNext, j.t, lo, min(rp.U, lo+chunkUsers))
	case jobJoin:
		lo := i * chunkLegs
		rp.fillLegs(rp.joiners[lo:min(len(rp.joiners), lo+chunkLegs)], tmp)
	case jobStats:
		rp.stats.addBlock(rp, rp.recs[j.set])
	}
}

// startHelper starts, for a replication run alone (replications 1, else
// replications already run in parallel) on two or more cores, the helper
// goroutine. It allocates nothing per job. The returned function stops it
// and waits for it to return.
func (rp *rep) startHelper() func() {
	if runtime.GOMAXPROCS(0) < 2 || rp.cfg.Run.Replications > 1 || rp.U < minUsersForHelper {
		return func() {}
	}
	h := &helper{work: make(chan entry, helperQueue), exited: make(chan struct{})}
	rp.helper = h
	go func() {
		defer close(h.exited)
		for e := range h.work {
			func() {
				defer func() {
					if p := recover(); p != nil {
						e.j.pv.Store(&panicValue{p})
						e.j.finish()
					}
				}()
				rp.runClaims(e.j, e.gen, rp.fadeTmp[1])
			}()
		}
	}()
	// Stopping waits for the goroutine: nothing touches the replication
	// once Run returns, also after a panic.
	return func() { close(h.work); <-h.exited; rp.helper = nil }
}

// minUsersForHelper is the fewest users for which a helper pays.
const minUsersForHelper = 128
