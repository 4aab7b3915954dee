package multicell

import (
	"runtime"
	"sync/atomic"

	"github.com/fadeloop/fadeloop/loop"
)

// Jobs shared between the replication's goroutine and its helper
// (fill.go). A job is cut into chunks; whoever claims a chunk (an atomic
// compare-and-swap on the job's state: generation, chunks and next chunk) runs
// it. The helper takes the jobs in the order posted, and between two
// chunks of one it takes the chunks left of the joining-legs and gains
// jobs (the ones the replication's goroutine waits for soonest); the replication's
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
	t      int64 // jobGains: slot of the shadowing update; jobFill: the block's first slot
	chunks int
	gen    uint32 // the generation posted (replication's goroutine only)

	state  atomic.Uint64 // generation<<32 | chunks<<16 | next chunk to claim (jobState)
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
	if _, total, _ := jobState(j.state.Load()); j.fin.Add(1) >= int64(total) && j.waiting.Load() {
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
	if j.chunks >= 1<<16 {
		panic("multicell: job of 65536 chunks or more") // programmer error: MaxUsers keeps chunks far below
	}
	j.state.Store(uint64(g)<<32 | uint64(j.chunks)<<16)
	if rp.helper == nil {
		rp.runClaims(j, g, 0)
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

// runClaims runs the chunks of generation g of j that it can claim, on
// goroutine who (0 the replication's, 1 the helper).
func (rp *rep) runClaims(j *job, g uint32, who int) {
	for {
		v := j.state.Load()
		if gen, total, next := jobState(v); gen != g || next >= total {
			return
		}
		if !j.state.CompareAndSwap(v, v+1) {
			continue
		}
		_, _, next := jobState(v)
		if who == 0 {
			rp.runChunk(j, next, 0)
			j.finish()
			continue
		}
		rp.helperChunk(j, next)
		// Between chunks of a long job, the helper first takes what the
		// replication's goroutine will wait for soonest: the joining
		// legs (waited for now) and the next shadowing update's gains.
		for _, u := range [...]*job{&rp.jobs.join, &rp.jobs.gains} {
			if u != j {
				rp.helperClaims(u)
			}
		}
	}
}

// helperChunk runs chunk i of j on the helper; a panic is kept for
// complete to re-raise and the chunk counts as finished.
func (rp *rep) helperChunk(j *job, i int) {
	defer j.finish()
	defer func() {
		if p := recover(); p != nil {
			j.pv.Store(&panicValue{loop.NewPanicError(p)}) // with the helper's stack
		}
	}()
	rp.runChunk(j, i, 1)
}

// helperClaims runs on the helper the chunks left of j's current
// generation (none when it is not posted: its state is then exhausted).
func (rp *rep) helperClaims(j *job) {
	for {
		v := j.state.Load()
		_, total, next := jobState(v)
		if next >= total {
			return
		}
		if j.state.CompareAndSwap(v, v+1) {
			rp.helperChunk(j, next)
		}
	}
}

// jobState splits a job's state: generation, chunks, next chunk to claim.
// One word, so a claim (compare-and-swap) never mixes two generations.
func jobState(v uint64) (gen uint32, total, next int) {
	return uint32(v >> 32), int(v >> 16 & 0xffff), int(v & 0xffff)
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
		rp.runClaims(j, j.gen, 0)
	}
	rp.waitChunks(j)
	if p := j.pv.Load(); p != nil {
		panic(p.v) // recovered by Run as a PanicError
	}
}

// waitChunks returns when every chunk of j's generation has finished. The
// helper is at most a chunk away (or, for the statistics, a few jobs): a
// short spin, then sleep until its last chunk finishes.
func (rp *rep) waitChunks(j *job) {
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
}

// endJobs ends every job in flight before the replication returns, so
// the helper no longer touches it: completed (chunks left run here, a
// chunk's panic re-raised), or with abandon (run returning early or
// panicking) the chunks nobody started are dropped and the running ones
// waited for, without raising another panic over the first.
func (rp *rep) endJobs(abandon bool) {
	for _, j := range rp.jobs.all() {
		if !abandon {
			rp.complete(j)
			continue
		}
		if !j.posted {
			continue
		}
		for {
			v := j.state.Load()
			_, total, next := jobState(v)
			if next >= total {
				break
			}
			// All claimed, the dropped ones counted as finished.
			if j.state.CompareAndSwap(v, v-uint64(next)+uint64(total)) {
				j.fin.Add(int64(total - next))
				break
			}
		}
		j.posted = false
		if rp.helper != nil {
			rp.waitChunks(j) // the running ones; their panics are not raised over the first
		}
	}
}

// chunkHook, when set (tests), is called before each chunk runs. It may
// panic but must not call t.Fatal or runtime.Goexit (on the helper that
// would end the goroutine without a trace).
var chunkHook func(kind jobKind, onHelper bool)

// runChunk runs chunk i of j on goroutine who (its scratch and plan
// cache: rep.fadeTmp[who], rep.plans[who]).
func (rp *rep) runChunk(j *job, i int, who int) {
	if chunkHook != nil {
		chunkHook(j.kind, who == 1)
	}
	switch j.kind {
	case jobFill:
		lo := i * chunkUsers
		rp.fillSet(j.set, j.t, j.n, lo, min(rp.U, lo+chunkUsers), who)
	case jobGains:
		lo := i * chunkUsers
		rp.gainsRange(rp.slowNext, j.t, lo, min(rp.U, lo+chunkUsers))
	case jobJoin:
		lo := i * chunkLegs
		rp.fillListed(rp.fade, rp.joiners[lo:min(len(rp.joiners), lo+chunkLegs)], rp.blockT0, rp.blockN, who)
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
			rp.runClaims(e.j, e.gen, 1)
		}
	}()
	// Stopping waits for the goroutine: nothing touches the replication
	// once Run returns, also after a panic.
	return func() { close(h.work); <-h.exited; rp.helper = nil }
}

// minUsersForHelper is the fewest users for which a helper pays.
const minUsersForHelper = 128
