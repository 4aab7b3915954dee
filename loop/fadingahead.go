package loop

import (
	"math"
	"math/rand/v2"
	"runtime"
	"sync"
	"sync/atomic"

	"github.com/fadeloop/fadeloop/fading"
)

// userGen generates one user's per-slot inputs of a replication.
type userGen struct {
	src      gainSource
	shadow   *fading.Shadowing
	shDB     []float64
	plLin    float64
	actRand  *rand.Rand
	actOn    bool
	actLeft  int64
	qOn      float64 // 1/mean on-burst
	qOff     float64 // 1/mean off-burst
	measRand *rand.Rand
	sigmaLn  float64
	cmdRand  *rand.Rand
	cmdP     float64
	levels   int
}

// genBuf is one block of generated inputs, user-major: x[u*rs+s].
type genBuf struct {
	gain []float64
	act  []uint8   // nil when every user is always on
	merr []float64 // nil without estimation error: factor on the SIR
	cerr []uint8   // nil without command errors: level offset, 0 none
	len  int
	t0   int64
	wg   sync.WaitGroup
}

type genTask struct {
	rp     *replication
	buf    *genBuf
	u0, u1 int
}

// genPool runs generation tasks on a fixed set of workers. A panic in a
// task is recovered, recorded (the first one) and reported by err, so a
// programmer error fails the run instead of the process.
type genPool struct {
	tasks    chan genTask
	wg       sync.WaitGroup
	panicked atomic.Pointer[PanicError]
}

// err returns the first recovered panic of the pool's workers, or nil.
func (p *genPool) err() error {
	if pe := p.panicked.Load(); pe != nil {
		return pe
	}
	return nil
}

// runTask runs one generation task, recovering a panic into the pool; pc
// is the worker's interpolation-plan cache (users of a task advance in
// step, so those with the same Doppler share plans).
func (p *genPool) runTask(t genTask, pc *fading.PlanCache) {
	defer t.buf.wg.Done()
	defer func() {
		if v := recover(); v != nil {
			p.panicked.CompareAndSwap(nil, NewPanicError(v))
		}
	}()
	if p.panicked.Load() != nil {
		return
	}
	for u := t.u0; u < t.u1; u++ {
		t.rp.genUser(t.buf, u, pc)
	}
}

func newGenPool(workers int) *genPool {
	p := &genPool{tasks: make(chan genTask, 1024)}
	for i := 0; i < workers; i++ {
		p.wg.Add(1)
		go func() {
			defer p.wg.Done()
			pc := new(fading.PlanCache)
			for t := range p.tasks {
				p.runTask(t, pc)
			}
		}()
	}
	return p
}

// help runs queued generation tasks on the calling goroutine until none is
// queued: a replication waiting for its next block works instead of
// sleeping (any goroutine may run any task; a user's channel still has one
// task at a time, and the samples do not depend on who runs it).
func (p *genPool) help(pc *fading.PlanCache) {
	for {
		select {
		case t, ok := <-p.tasks:
			if !ok {
				return
			}
			p.runTask(t, pc)
		default:
			return
		}
	}
}

func (p *genPool) close() { close(p.tasks); p.wg.Wait() }

// genUser fills user u's part of buf for the block starting at buf.t0.
func (rp *replication) genUser(buf *genBuf, u int, pc *fading.PlanCache) {
	ug := &rp.gen[u]
	n := buf.len
	off := u * rp.rs
	g := buf.gain[off : off+n]
	if ch, ok := ug.src.(*fading.Channel); ok {
		ch.FillGainsShared(g, pc)
	} else {
		ug.src.FillGains(g)
	}
	if ug.shadow != nil {
		sh := ug.shDB[:n]
		ug.shadow.FillDB(sh)
		c := math.Ln10 / 10
		for i := range g {
			g[i] *= ug.plLin * math.Exp(c*sh[i])
		}
	} else if ug.plLin != 1 {
		for i := range g {
			g[i] *= ug.plLin
		}
	}
	if buf.act != nil {
		a := buf.act[off : off+n]
		if ug.actRand == nil {
			for i := range a {
				a[i] = 1
			}
		} else {
			for i := 0; i < n; {
				if ug.actLeft <= 0 {
					if ug.actLeft == 0 {
						ug.actOn = !ug.actOn
					}
					q := ug.qOff
					if ug.actOn {
						q = ug.qOn
					}
					ug.actLeft = geometric(ug.actRand, q)
				}
				k := int(min(ug.actLeft, int64(n-i)))
				var v uint8
				if ug.actOn {
					v = 1
				}
				for j := i; j < i+k; j++ {
					a[j] = v
				}
				i += k
				ug.actLeft -= int64(k)
			}
		}
	}
	if buf.merr != nil {
		m := buf.merr[off : off+n]
		for i := range m {
			m[i] = math.Exp(ug.sigmaLn * ug.measRand.NormFloat64())
		}
	}
	if buf.cerr != nil {
		c := buf.cerr[off : off+n]
		for i := range c {
			c[i] = 0
			if ug.cmdRand.Float64() < ug.cmdP {
				c[i] = uint8(1 + ug.cmdRand.IntN(ug.levels-1))
			}
		}
	}
}

// padStride rounds n elements of elemBytes up to an odd number of 64-byte
// cache lines, so that the same offset in consecutive rows falls in
// different cache sets (no 4 KiB aliasing between users).
func padStride(n, elemBytes int) int {
	per := 64 / elemBytes
	lines := (n + per - 1) / per
	if lines%2 == 0 {
		lines++
	}
	return lines * per
}

// geometric draws a length >= 1 with P(k) = (1−q)^(k−1) q.
func geometric(r *rand.Rand, q float64) int64 {
	if q >= 1 {
		return 1
	}
	u := 1 - r.Float64() // (0, 1]
	k := 1 + math.Floor(math.Log(u)/math.Log1p(-q))
	if k > 1<<50 {
		k = 1 << 50
	}
	return int64(k)
}

// schedule starts generating the block starting at t0 into buf.
func (rp *replication) schedule(buf *genBuf, t0 int64) {
	buf.t0 = t0
	buf.len = int(min(int64(rp.blk), rp.sh.total-t0))
	if buf.len <= 0 {
		buf.len = 0
		return
	}
	// Small tasks (about 16 per core, e.g. 2 users each for 64 users on 2
	// cores): the slot loop, when it has finished a block, runs queued
	// tasks itself (help) and then waits only for the ones under way; with
	// 4 per core that tail cost more than the extra plan computations.
	w := 16 * runtime.GOMAXPROCS(0)
	chunk := min(max(1, (rp.n+w-1)/w), 16)
	for u0 := 0; u0 < rp.n; u0 += chunk {
		buf.wg.Add(1)
		rp.pool.tasks <- genTask{rp: rp, buf: buf, u0: u0, u1: min(u0+chunk, rp.n)}
	}
}
