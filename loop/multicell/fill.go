package multicell

import "runtime"

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
	rp.split(job{kind: jobFill, n: n})
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

// jobKind names a piece of a replication's work that splits in two
// independent halves (rep.split).
type jobKind uint8

const (
	jobFill  jobKind = iota + 1 // fillRange over users, n slots
	jobGains                    // gainsRange over users, slot t
)

// job is one split piece of work.
type job struct {
	kind jobKind
	n    int
	t    int64
}

// helper is a goroutine that runs the second half of split jobs.
type helper struct {
	work chan job
	done chan any // the half's panic value, or nil
}

// half runs half h (0 or 1) of j.
func (rp *rep) half(j job, h int) {
	lo, hi := halfRange(rp.U, h)
	switch j.kind {
	case jobFill:
		rp.fillRange(lo, hi, j.n)
	case jobGains:
		rp.gainsRange(lo, hi, j.t)
	}
}

// split runs j's two halves (users [0, U/2) and [U/2, U)), the second on
// the helper goroutine when there is one, else one after the other. Each
// half writes only its own users' state and every user has its own random
// streams, so the result is the same with or without the helper
// (determinism across GOMAXPROCS, tested). One hand-off per block of
// fading and per shadowing update, not per slot.
func (rp *rep) split(j job) {
	if rp.helper == nil {
		rp.half(j, 0)
		rp.half(j, 1)
		return
	}
	rp.helper.work <- j
	rp.half(j, 0)
	if pv := <-rp.helper.done; pv != nil {
		panic(pv) // recovered by Run as a PanicError
	}
}

// startHelper starts, for a replication run alone (replications 1, else
// replications already run in parallel) on two or more cores with at least
// 2·minUsersPerHalf users, the goroutine that runs the second half of
// split jobs (fading fill, slow gains). The channels
// order the memory; it allocates nothing per job. The returned function
// stops it.
func (rp *rep) startHelper() func() {
	if runtime.GOMAXPROCS(0) < 2 || rp.cfg.Run.Replications > 1 || rp.full || rp.U < 2*minUsersPerHalf {
		return func() {}
	}
	h := &helper{work: make(chan job), done: make(chan any)}
	rp.helper = h
	go func() {
		for j := range h.work {
			var pv any
			func() {
				defer func() { pv = recover() }()
				rp.half(j, 1)
			}()
			h.done <- pv
		}
	}()
	return func() { close(h.work); rp.helper = nil }
}

// minUsersPerHalf is the fewest users per goroutine of a split job.
const minUsersPerHalf = 64

// halfRange is half h (0 or 1) of [0, n): [0, n/2) or [n/2, n).
func halfRange(n, h int) (lo, hi int) {
	if h == 0 {
		return 0, n / 2
	}
	return n / 2, n
}
