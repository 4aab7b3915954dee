package loop

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"sync/atomic"

	"github.com/fadeloop/fadeloop/fading"
)

// replication is the state of one replication.
type replication struct {
	sh   *shared
	r    int
	seed uint64
	pool *genPool
	n    int
	blk  int
	rs   int // row stride of the generated buffers: blk padded so rows do not alias in the caches
	gen  []userGen
	bufs [2]genBuf
	pc   fading.PlanCache // interpolation plans of the tasks this replication's goroutine runs (genPool.help)

	bank *bank
	rx   []float64
	sir  []float64
	meas []float64
	gcol []float64 // this slot's gains
	arow []uint8
	crow []uint8

	// ideal mode
	idK     []float64
	idFixed []bool

	// blocks
	effAcc []float64
	effN   []int32
	// effFused counts the fused slots of the current block: every user
	// had one more slot in its accumulator than effN says.
	effFused int32
	blkRand  []*rand.Rand
	blockB   int64
	blkLeft  int64 // slots left in the current block

	col    *collector
	inputs slotInputs // the slices col reads each slot

	trace    *tracer
	idealBad int64 // slots where the joint ideal solution was infeasible
}

func newReplication(sh *shared, r int, pool *genPool, topt TraceOptions) (*replication, error) {
	sc := sh.sc
	n := sh.n
	rp := &replication{sh: sh, r: r, seed: repSeed(sc.Run.Seed, r), pool: pool, n: n, blk: genBlockSlotsFor(n)}
	if sh.total < int64(rp.blk) {
		rp.blk = int(sh.total)
	}
	rp.rs = padStride(rp.blk, 8)
	anyAct, anyMerr, anyCerr := false, sc.Receiver.SIREstimationErrorDB > 0, sc.InnerLoop.Mode == InnerModeClosedLoop && sc.InnerLoop.CommandErrorProb > 0
	levels := 2
	if sc.InnerLoop.Command == CommandMultiLevel {
		levels = len(sc.InnerLoop.LevelsDB)
	}
	rp.gen = make([]userGen, n)
	for u := 0; u < n; u++ {
		ui := sh.users[u]
		g := sc.Groups[ui.group]
		ug := &rp.gen[u]
		switch {
		case sh.hk != nil && sh.hk.static != nil:
			ug.src, ug.plLin = constGain(sh.hk.static[u]), 1
		case sh.hk != nil && sh.hk.matrix != nil:
			ug.src, ug.plLin = constGain(1), 1
		default:
			cfg := fading.ChannelConfig{
				DopplerHz:    ui.dopplerHz,
				SampleRateHz: sh.rateHz,
				Profile:      sh.profile[ui.group],
				RicianKDB:    groupRicianKDB(sc, ui.group),
				LOS:          g.LOS,
				Generator:    fading.Generator(int(g.Generator) - 1),
				Sinusoids:    g.Sinusoids,
			}
			if g.LOS {
				cfg.LOSAngleRad = 2*math.Pi*fading.NewStream(rp.seed, u, 0, streamLOSAngle).Float64() - math.Pi
			}
			ch, err := fading.NewChannel(cfg, rp.seed, u)
			if err != nil {
				return nil, fmt.Errorf("user %d channel: %w", u, err)
			}
			ug.src = ch
			ug.plLin = dbToLin(-ui.pathLossDB) * groupCapturedLin(sc, ui.group)
			if g.ShadowingSigmaDB > 0 {
				s, err := fading.NewShadowing(fading.ShadowingConfig{SigmaDB: g.ShadowingSigmaDB, DecorrelationM: g.ShadowingDecorrelationM,
					SpeedMps: ui.speedKmh / 3.6, SamplePeriodS: 1 / sh.rateHz}, fading.NewStream(rp.seed, u, 0, fading.StreamShadowing))
				if err != nil {
					return nil, fmt.Errorf("user %d shadowing: %w", u, err)
				}
				ug.shadow = s
				ug.shDB = make([]float64, rp.blk)
			}
		}
		if g.ActivityFactor < 1 {
			anyAct = true
			ug.actRand = fading.NewStream(rp.seed, u, 0, streamActivity)
			ug.qOn = 1 / g.MeanBurstSlots
			ug.qOff = 1 / (g.MeanBurstSlots * (1 - g.ActivityFactor) / g.ActivityFactor)
			ug.actOn = ug.actRand.Float64() < g.ActivityFactor
			ug.actLeft = -1
		}
		if anyMerr {
			ug.measRand = fading.NewStream(rp.seed, u, 0, streamMeasErr)
			ug.sigmaLn = sc.Receiver.SIREstimationErrorDB * math.Ln10 / 10
		}
		if anyCerr {
			ug.cmdRand = fading.NewStream(rp.seed, u, 0, streamCmdErr)
			ug.cmdP = sc.InnerLoop.CommandErrorProb
			ug.levels = levels
		}
	}
	for i := range rp.bufs {
		b := &rp.bufs[i]
		b.gain = make([]float64, n*rp.rs)
		if anyAct {
			b.act = make([]uint8, n*rp.rs)
		}
		if anyMerr {
			b.merr = make([]float64, n*rp.rs)
		}
		if anyCerr {
			b.cerr = make([]uint8, n*rp.rs)
		}
	}
	rp.bank = newBank(n, sc.InnerLoop, sc.OuterLoop, sc.Receiver.SIRAveragingSlots, sh.initP)
	rp.rx = make([]float64, n)
	rp.sir = make([]float64, n)
	rp.meas = make([]float64, n)
	rp.gcol = make([]float64, n)
	if anyAct {
		rp.arow = make([]uint8, n)
	}
	if anyCerr {
		rp.crow = make([]uint8, n)
	}
	if sc.InnerLoop.Mode == InnerModeIdeal {
		rp.idK = make([]float64, n)
		rp.idFixed = make([]bool, n)
	}
	rp.effAcc = make([]float64, n)
	rp.effN = make([]int32, n)
	rp.blkRand = make([]*rand.Rand, n)
	for u := range rp.blkRand {
		rp.blkRand[u] = fading.NewStream(rp.seed, u, 0, streamBlock)
	}
	rp.blockB = int64(sc.OuterLoop.BlockSlots)
	rp.blkLeft = rp.blockB
	rp.col = newCollector(sh)
	rp.inputs = slotInputs{sirLin: rp.sir, invTarget: rp.bank.invTarget, powerMW: rp.bank.p, receivedMW: rp.rx,
		effSIRSum: rp.effAcc, effSIRCount: rp.effN, maxPowerMW: rp.bank.pmax}
	if r == 0 && len(topt.Users) > 0 {
		rp.trace = newTracer(topt, sh.total)
	}
	return rp, nil
}

// run simulates the replication slot by slot. Block b+1 is generated (in
// parallel across users) while the loop runs block b; a user's channel is
// only ever advanced by one task at a time, in block order.
func (rp *replication) run(ctx context.Context, done *atomic.Int64) (*repResult, error) {
	blk := int64(rp.blk)
	rp.schedule(&rp.bufs[0], 0)
	rp.pool.help(&rp.pc)
	rp.bufs[0].wg.Wait()
	err := rp.pool.err()
	for b := 0; err == nil; b++ {
		cur, nxt := &rp.bufs[b&1], &rp.bufs[(b+1)&1]
		if cur.len == 0 {
			break
		}
		rp.schedule(nxt, cur.t0+blk)
		if err = ctx.Err(); err != nil {
			nxt.wg.Wait()
			break
		}
		rp.runBlock(cur)
		done.Add(int64(rp.n) * int64(cur.len))
		rp.pool.help(&rp.pc)
		nxt.wg.Wait()
		err = rp.pool.err()
	}
	if err != nil {
		return nil, err
	}
	res := rp.col.result()
	if rp.sh.pool != nil {
		rp.sh.pool.addCollector(rp.col)
	}
	res.idealBad = rp.idealBad
	res.targetDB = append([]float64(nil), rp.bank.targetDB...)
	if rp.trace != nil {
		res.traces = rp.trace.out
		res.traceCut = rp.trace.truncated
	}
	return res, nil
}
