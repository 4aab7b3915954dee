package loop

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"
	"sync/atomic"
	"time"

	"github.com/fadeloop/fadeloop/fading"
)

// EngineVersion identifies the engine that produced a Report; it changes
// whenever the same (scenario, seed) could give different figures.
const EngineVersion = "fadeloop-loop/1.0.0"

// Random stream kinds of package loop (fading.NewStream; fading's own kinds
// are below 100). Index is 0 for all of them.
const (
	streamActivity fading.StreamKind = 100 // on/off activity chain of a user
	streamMeasErr  fading.StreamKind = 101 // SIR estimation error of a user
	streamCmdErr   fading.StreamKind = 102 // command errors of a user
	streamBlock    fading.StreamKind = 103 // block-error draws of a user
	streamLOSAngle fading.StreamKind = 104 // arrival angle of a user's LOS component
)

// HistBinsPerOctaveLog2 is log2 of the bins per octave of the per-user
// histograms of up to 512 users: bins are at most 10·log10(1 + 2^−7) =
// 0.034 dB wide (see histLayout).
const HistBinsPerOctaveLog2 = 7

// genBlockSlots is the number of slots of fading generated ahead per block.
const genBlockSlots = 512

// Progress is a progress event of Run.
type Progress struct {
	Fraction       float64       // work done, [0, 1]
	UserSlots      int64         // user-slots simulated so far, warm-up included, all replications
	TotalUserSlots int64         // user-slots of the whole run
	UserSlotsPerS  float64       // throughput so far, user-slots per second of wall-clock time
	Elapsed        time.Duration // wall-clock time since the start
}

// TraceOptions asks for decimated per-user traces of replication 0.
type TraceOptions struct {
	Users      []int // user indices (0-based, group order) to trace; at most 64
	Decimation int   // keep one slot in Decimation, >= 1 (0 means 1)
}

// RunOptions are the options of Run that do not change its figures.
type RunOptions struct {
	// Progress, when set, is called from one goroutine about every
	// ProgressEvery and once at the end.
	Progress      func(Progress)
	ProgressEvery time.Duration // default 250 ms
	Trace         TraceOptions
}

// hooks replace parts of the model (tests only).
type hooks struct {
	// static, when set, is each user's static channel power gain (linear,
	// path loss included); it replaces fading, path loss and shadowing.
	static []float64
	// matrix, when set, is a link-gain matrix: G[i][j] is the gain from
	// user j's transmitter to user i's receiver and
	// SIR_i = G_ii p_i / (Σ_{j≠i} G_ij p_j + eta[i]) (no processing gain);
	// IDEAL mode then runs the Foschini–Miljanic iteration.
	matrix [][]float64
	eta    []float64 // noise per receiver in mW (matrix mode)
	// noFast disables the fused fast path of runBlock.
	noFast bool
}

// gainSource is a stream of channel power gains (fading.Channel, or a
// static gain in tests).
type gainSource interface{ FillGains(dst []float64) }

type constGain float64

func (c constGain) FillGains(dst []float64) {
	for i := range dst {
		dst[i] = float64(c)
	}
}

// userInfo is a user's placement and the parts of its channel that do not
// change across replications.
type userInfo struct {
	group      int
	distanceM  float64
	speedKmh   float64
	dopplerHz  float64
	pathLossDB float64
	bin        int
}

// Run simulates the scenario: every replication slot by slot (DESIGN.md
// "Model"), with fading generated ahead in blocks in parallel across users
// and replications in parallel up to GOMAXPROCS, and returns the figures
// with their confidence intervals. The scenario is normalised (a copy; the
// caller's value is not changed) and validated first: invalid input returns
// Violations. The result is identical for identical (scenario, seed)
// whatever GOMAXPROCS is, apart from WallTimeS and UserSlotsPerS. A
// cancelled ctx stops the run within one block of slots and returns
// ctx.Err().
func Run(ctx context.Context, sc Scenario, opts RunOptions) (*Report, error) {
	return run(ctx, sc, opts, nil)
}

func run(ctx context.Context, sc Scenario, opts RunOptions, hk *hooks) (*Report, error) {
	start := time.Now()
	sc = cloneScenario(sc)
	sc.Normalise()
	v := sc.Validate()
	if sc.MultiCell() && len(v) == 0 {
		v = append(v, Violation{"layout.sites", "a multi-cell scenario runs on the multi-cell engine (multicell.RunScenario), not loop.Run"})
	}
	if opts.Trace.Decimation < 0 {
		v = append(v, Violation{"trace.decimation", fmt.Sprintf("must be >= 1, got %d", opts.Trace.Decimation)})
	}
	if len(opts.Trace.Users) > 64 {
		v = append(v, Violation{"trace.users", fmt.Sprintf("must list at most 64 users, got %d", len(opts.Trace.Users))})
	}
	nUsers := sc.Users()
	for i, u := range opts.Trace.Users {
		if u < 0 || u >= nUsers {
			v = append(v, Violation{fmt.Sprintf("trace.users[%d]", i), fmt.Sprintf("must be a user index in [0, %d), got %d", nUsers, u)})
		}
	}
	if len(v) > 0 {
		return nil, v
	}
	users, err := placeUsers(sc)
	if err != nil {
		return nil, err
	}
	if hk != nil {
		if (hk.static != nil && len(hk.static) != len(users)) || (hk.matrix != nil && (len(hk.matrix) != len(users) || len(hk.eta) != len(users))) {
			panic("loop: hook sizes do not match the user count")
		}
	}
	sh := newShared(sc, users, hk)
	R := sc.Run.Replications
	total := sc.TotalSlots()
	totalWork := int64(len(users)) * total * int64(R)

	procs := runtime.GOMAXPROCS(0)
	pool := newGenPool(procs)
	defer pool.close()

	var done atomic.Int64
	stopProgress := startProgress(opts, &done, totalWork, start)

	results := make([]*repResult, R)
	errs := make([]error, R)
	sem := make(chan struct{}, procs)
	var wg sync.WaitGroup
	for r := 0; r < R; r++ {
		if ctx.Err() != nil {
			errs[r] = ctx.Err()
			break
		}
		sem <- struct{}{}
		wg.Add(1)
		go func(r int) {
			defer wg.Done()
			defer func() { <-sem }()
			defer func() {
				if v := recover(); v != nil {
					errs[r] = NewPanicError(v)
				}
			}()
			rp, err := newReplication(sh, r, pool, opts.Trace)
			if err != nil {
				errs[r] = err
				return
			}
			results[r], errs[r] = rp.run(ctx, &done)
		}(r)
	}
	wg.Wait()
	stopProgress()
	for _, e := range errs {
		if e != nil {
			if ctx.Err() != nil {
				return nil, ctx.Err()
			}
			return nil, e
		}
	}
	rep := sh.report(results)
	rep.WallTimeS = time.Since(start).Seconds()
	if rep.WallTimeS > 0 {
		rep.UserSlotsPerS = float64(totalWork) / rep.WallTimeS
	}
	if opts.Progress != nil {
		el := time.Since(start)
		opts.Progress(Progress{Fraction: 1, UserSlots: totalWork, TotalUserSlots: totalWork,
			UserSlotsPerS: float64(totalWork) / el.Seconds(), Elapsed: el})
	}
	return rep, nil
}

func startProgress(opts RunOptions, done *atomic.Int64, total int64, start time.Time) func() {
	if opts.Progress == nil {
		return func() {}
	}
	every := opts.ProgressEvery
	if every <= 0 {
		every = 250 * time.Millisecond
	}
	stop := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		tk := time.NewTicker(every)
		defer tk.Stop()
		for {
			select {
			case <-stop:
				return
			case <-tk.C:
				d := done.Load()
				el := time.Since(start)
				opts.Progress(Progress{Fraction: float64(d) / float64(max(total, 1)), UserSlots: d, TotalUserSlots: total,
					UserSlotsPerS: float64(d) / el.Seconds(), Elapsed: el})
			}
		}
	}()
	return func() { close(stop); wg.Wait() }
}

// cloneScenario deep-copies the slices of sc.
func cloneScenario(sc Scenario) Scenario {
	g := make([]UserGroup, len(sc.Groups))
	copy(g, sc.Groups)
	for i := range g {
		g[i].DistancesM = append([]float64(nil), g[i].DistancesM...)
		g[i].Speeds = append([]SpeedShare(nil), g[i].Speeds...)
		g[i].CustomTaps = append([]Tap(nil), g[i].CustomTaps...)
	}
	sc.Groups = g
	sc.InnerLoop.LevelsDB = append([]float64(nil), sc.InnerLoop.LevelsDB...)
	sc.InnerLoop.ThresholdsDB = append([]float64(nil), sc.InnerLoop.ThresholdsDB...)
	sc.Link.Table = append([]LinkPoint(nil), sc.Link.Table...)
	return sc
}

// placeUsers places every user of a valid scenario: distances by placement
// (UNIFORM_DISTANCE d_k = min + (max−min)·k/(n−1); UNIFORM_AREA
// d_k = √(min² + (max²−min²)·k/(n−1)); one user sits at the midpoint), speeds
// assigned in proportion to the weights, interleaved along the group
// (largest deficit first), and the mean path loss.
func placeUsers(sc Scenario) ([]userInfo, error) {
	var out []userInfo
	for gi, g := range sc.Groups {
		pl, err := pathLossModel(g.PathLoss, g.CarrierFrequencyHz)
		if err != nil {
			return nil, err
		}
		wsum := 0.0
		for _, s := range g.Speeds {
			wsum += s.Weight
		}
		assigned := make([]float64, len(g.Speeds))
		for k := 0; k < g.Count; k++ {
			var d float64
			frac := 0.5
			if g.Count > 1 {
				frac = float64(k) / float64(g.Count-1)
			}
			switch g.Placement {
			case PlacementExplicit:
				d = g.DistancesM[k]
			case PlacementUniformDistance:
				d = g.MinDistanceM + (g.MaxDistanceM-g.MinDistanceM)*frac
			default:
				a2, b2 := g.MinDistanceM*g.MinDistanceM, g.MaxDistanceM*g.MaxDistanceM
				d = math.Sqrt(a2 + (b2-a2)*frac)
			}
			best, bestDef := 0, math.Inf(-1)
			for j, s := range g.Speeds {
				def := s.Weight/wsum*float64(k+1) - assigned[j]
				if def > bestDef {
					best, bestDef = j, def
				}
			}
			assigned[best]++
			v := g.Speeds[best].SpeedKmh
			loss, err := pl.LossDB(d)
			if err != nil {
				return nil, Violations{{Field: fmt.Sprintf("groups[%d].path_loss.model", gi), Rule: fmt.Sprintf("not valid at %g m: %v", d, err)}}
			}
			out = append(out, userInfo{group: gi, distanceM: d, speedKmh: v,
				dopplerHz: fading.DopplerHz(v, g.CarrierFrequencyHz), pathLossDB: loss})
		}
	}
	return out, nil
}

// shared is what all replications of a run share (read-only while running).
type shared struct {
	sc      Scenario
	users   []userInfo
	hk      *hooks
	n       int
	total   int64
	warm    int64
	rateHz  float64
	gp      float64 // processing gain
	noiseMW float64
	f1      float64 // 1 + other-cell ratio
	link    *linkModel
	profile []fading.Profile // per group
	initP   []float64        // initial power per user, mW

	sl, pl, nl *histLayout // SIR ratio, Tx power (mW), noise rise
	nbins      int
	binEdges   []float64
	marginLin  float64
	convW      int
	convTolDB  float64
}

// Convergence rule: a user has converged at the first slot where the mean
// SIR error over the last ConvergenceWindowS (at least one slot) is within
// ±ConvergenceToleranceDB (common practice).
const (
	ConvergenceWindowS     = 0.01
	ConvergenceToleranceDB = 1.0
)

func newShared(sc Scenario, users []userInfo, hk *hooks) *shared {
	s := &shared{sc: sc, users: users, hk: hk, n: len(users), total: sc.TotalSlots(), warm: sc.Run.WarmupSlots,
		rateHz: sc.InnerLoop.UpdateRateHz, gp: sc.Receiver.ProcessingGain(), noiseMW: dbToLin(sc.Receiver.NoiseDBm()),
		f1: 1 + sc.Receiver.OtherCellRatio, link: newLinkModel(sc.Link)}
	for g := range sc.Groups {
		s.profile = append(s.profile, groupProfile(sc, g))
	}
	il := sc.InnerLoop
	for _, u := range users {
		s.initP = append(s.initP, initialPowerMW(il, sc.OuterLoop, sc.Receiver, u.pathLossDB))
	}
	// Histogram resolution: HistBinsPerOctaveLog2 = 7, i.e. 128 bins per
	// octave (<= 0.034 dB wide) up to 512 users, one step coarser per
	// doubling beyond (down to 32 per octave, 0.13 dB), so that the hot part
	// of the per-user histograms stays cache-resident and their memory
	// bounded. The receiver's noise-rise histogram uses 512 per octave.
	m := uint(HistBinsPerOctaveLog2)
	for nb := len(users); nb > 512 && m > 5; nb /= 2 {
		m--
	}
	s.sl = layoutForDB(-48, 48, m)
	s.pl = layoutForDB(il.MinPowerDBm, il.MaxPowerDBm, m)
	s.nl = layoutForDB(0, 60, 9)
	s.marginLin = dbToLin(-sc.Run.OutageMarginDB)
	s.convW = max(1, int(math.Round(ConvergenceWindowS*s.rateHz)))
	s.convTolDB = ConvergenceToleranceDB
	// Distance bins: equal width over the users' distance range.
	s.nbins = sc.Run.DistanceBins
	dmin, dmax := math.Inf(1), math.Inf(-1)
	for _, u := range users {
		dmin, dmax = math.Min(dmin, u.distanceM), math.Max(dmax, u.distanceM)
	}
	for b := 0; b <= s.nbins; b++ {
		s.binEdges = append(s.binEdges, dmin+(dmax-dmin)*float64(b)/float64(s.nbins))
	}
	for i := range s.users {
		b := 0
		if dmax > dmin {
			b = int(float64(s.nbins) * (s.users[i].distanceM - dmin) / (dmax - dmin))
		}
		s.users[i].bin = min(max(b, 0), s.nbins-1)
	}
	return s
}

// repSeed is the seed of replication r: the run seed itself for r = 0, a
// splitmix64 mix of (seed, r) otherwise.
func repSeed(seed uint64, r int) uint64 {
	if r == 0 {
		return seed
	}
	z := seed + uint64(r)*0x9e3779b97f4a7c15
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

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

// runTask runs one generation task, recovering a panic into the pool.
func (p *genPool) runTask(t genTask) {
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
		t.rp.genUser(t.buf, u)
	}
}

func newGenPool(workers int) *genPool {
	p := &genPool{tasks: make(chan genTask, 1024)}
	for i := 0; i < workers; i++ {
		p.wg.Add(1)
		go func() {
			defer p.wg.Done()
			for t := range p.tasks {
				p.runTask(t)
			}
		}()
	}
	return p
}

func (p *genPool) close() { close(p.tasks); p.wg.Wait() }

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
	effAcc  []float64
	effN    []int32
	blkRand []*rand.Rand
	blockB  int64
	blkLeft int64 // slots left in the current block

	col *collector

	trace    *tracer
	idealBad int64 // slots where the joint ideal solution was infeasible
}

func newReplication(sh *shared, r int, pool *genPool, topt TraceOptions) (*replication, error) {
	sc := sh.sc
	n := sh.n
	rp := &replication{sh: sh, r: r, seed: repSeed(sc.Run.Seed, r), pool: pool, n: n, blk: genBlockSlots}
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
	if r == 0 && len(topt.Users) > 0 {
		rp.trace = newTracer(topt, sh.total)
	}
	return rp, nil
}

// genUser fills user u's part of buf for the block starting at buf.t0.
func (rp *replication) genUser(buf *genBuf, u int) {
	ug := &rp.gen[u]
	n := buf.len
	off := u * rp.rs
	g := buf.gain[off : off+n]
	ug.src.FillGains(g)
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
	w := 4 * runtime.GOMAXPROCS(0)
	chunk := min(max(1, (rp.n+w-1)/w), 16)
	for u0 := 0; u0 < rp.n; u0 += chunk {
		buf.wg.Add(1)
		rp.pool.tasks <- genTask{rp: rp, buf: buf, u0: u0, u1: min(u0+chunk, rp.n)}
	}
}

// run simulates the replication slot by slot. Block b+1 is generated (in
// parallel across users) while the loop runs block b; a user's channel is
// only ever advanced by one task at a time, in block order.
func (rp *replication) run(ctx context.Context, done *atomic.Int64) (*repResult, error) {
	blk := int64(rp.blk)
	rp.schedule(&rp.bufs[0], 0)
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
		nxt.wg.Wait()
		err = rp.pool.err()
	}
	if err != nil {
		return nil, err
	}
	return rp.col.result(rp), nil
}

// runBlock runs the slots of one generated block.
func (rp *replication) runBlock(buf *genBuf) {
	sh := rp.sh
	n, blk := rp.n, rp.rs
	b := rp.bank
	mode := b.mode
	matrix := sh.hk != nil && sh.hk.matrix != nil
	avg := b.avgK > 1
	needG := mode == InnerModeIdeal || rp.trace != nil
	for s := 0; s < buf.len; s++ {
		t := buf.t0 + int64(s)
		gcol := rp.gcol[:n]
		if needG {
			for u := range gcol {
				gcol[u] = buf.gain[u*blk+s]
			}
		}
		var act []uint8
		if buf.act != nil {
			act = rp.arow[:n]
			for u := range act {
				act[u] = buf.act[u*blk+s]
			}
		}
		// Commands due now change the powers.
		b.apply()
		if mode == InnerModeIdeal && !matrix {
			rp.idealSolve(gcol, act)
		}
		p := b.p[:n]
		rx, sir := rp.rx[:n], rp.sir[:n]
		var nr float64 // noise rise: total received power over thermal noise
		fused := false
		if matrix {
			nr = rp.matrixSIR(p, act)
		} else {
			tot := 0.0
			if act == nil {
				g := buf.gain[s:]
				for u := range rx {
					r := g[u*blk] * p[u]
					rx[u] = r
					tot += r
				}
			} else {
				for u := range rx {
					r := buf.gain[u*blk+s] * p[u] * float64(act[u])
					rx[u] = r
					tot += r
				}
			}
			X := sh.f1*tot + sh.noiseMW
			nr = X / sh.noiseMW
			if act == nil && !rp.sh.link.eesm && t >= sh.warm && rp.col.pending == 0 && (sh.hk == nil || !sh.hk.noFast) {
				// Fast path: SIR, figures and block accumulation in one pass.
				rp.col.slotFused(rp, X)
				fused = true
			} else {
				gp := sh.gp
				for u, r := range rx {
					sir[u] = gp * r / (X - r)
				}
			}
		}
		// The receiver measures and decides.
		switch mode {
		case InnerModeClosedLoop:
			meas := sir
			if buf.merr != nil || avg {
				meas = rp.meas[:n]
				if buf.merr != nil {
					for u := range meas {
						meas[u] = sir[u] * buf.merr[u*blk+s]
					}
				} else {
					copy(meas, sir)
				}
			}
			var cerr []uint8
			if buf.cerr != nil {
				cerr = rp.crow[:n]
				for u := range cerr {
					cerr[u] = buf.cerr[u*blk+s]
				}
			}
			b.decide(meas, cerr, act)
		case InnerModeIdeal:
			if matrix {
				b.invert(sir)
			}
		}
		if fused {
			rp.col.slotTail(t, nr)
		} else {
			rp.col.slot(t, rp, nr, act)
			rp.accumulate(act)
		}
		if rp.trace != nil {
			rp.trace.slot(t, rp, act)
		}
		rp.blockCheck(t)
	}
}

// accumulate adds this slot to each active user's block accumulator of
// the effective SIR.
func (rp *replication) accumulate(act []uint8) {
	sir := rp.sir[:rp.n]
	lm := rp.sh.link
	acc, cnt := rp.effAcc[:rp.n], rp.effN[:rp.n]
	if lm.eesm {
		for u, s := range sir {
			if act == nil || act[u] != 0 {
				acc[u] += lm.term(s)
				cnt[u]++
			}
		}
	} else {
		for u, s := range sir {
			if act == nil || act[u] != 0 {
				acc[u] += s
				cnt[u]++
			}
		}
	}
}

// blockCheck, at a block end, draws each user's block error from the link
// curve at the block's effective SIR and runs the outer loop.
func (rp *replication) blockCheck(t int64) {
	if rp.blkLeft--; rp.blkLeft > 0 {
		return
	}
	rp.blkLeft = rp.blockB
	sir := rp.sir[:rp.n]
	lm := rp.sh.link
	acc, cnt := rp.effAcc[:rp.n], rp.effN[:rp.n]
	measured := t >= rp.sh.warm
	for u := range sir {
		if cnt[u] == 0 {
			continue
		}
		bl := lm.blockBLER(acc[u], int(cnt[u]))
		e := rp.blkRand[u].Float64() < bl
		rp.bank.blockEnd(u, e)
		if measured {
			rp.col.block(u, e)
		}
		acc[u], cnt[u] = 0, 0
	}
}

// idealSolve sets every active user's power to the joint exact solution of
// SIR_i = γ_i for this slot's gains (single receiver): with c_i = γ_i/G_p,
// k_i = c_i/(1+c_i), X = (1+f)·R + N and r_i = k_i·X,
// X = ((1+f)·R_fixed + N) / (1 − (1+f)·Σ_free k_i); users whose power would
// leave [min, max] are clamped and the rest re-solved. When the free users'
// load (1+f)·Σ k_i reaches 1 the slot is infeasible and they go to maximum.
func (rp *replication) idealSolve(g []float64, act []uint8) {
	sh := rp.sh
	b := rp.bank
	n := rp.n
	k, fixed := rp.idK[:n], rp.idFixed[:n]
	p := b.p[:n]
	for u := range k {
		c := b.target[u] / sh.gp
		k[u] = c / (1 + c)
		fixed[u] = act != nil && act[u] == 0
	}
	for iter := 0; iter <= n; iter++ {
		sumK, rFix := 0.0, 0.0
		for u := range k {
			if fixed[u] {
				if act == nil || act[u] != 0 {
					rFix += g[u] * p[u]
				}
			} else {
				sumK += k[u]
			}
		}
		den := 1 - sh.f1*sumK
		if den <= 0 {
			rp.idealBad++
			for u := range k {
				if !fixed[u] {
					p[u] = b.pmax
				}
			}
			return
		}
		X := (sh.f1*rFix + sh.noiseMW) / den
		changed := false
		for u := range k {
			if fixed[u] {
				continue
			}
			x := k[u] * X / g[u]
			if !(x <= b.pmax) { // also g = 0
				x, fixed[u], changed = b.pmax, true, true
			} else if x < b.pmin {
				x, fixed[u], changed = b.pmin, true, true
			}
			p[u] = x
		}
		if !changed {
			return
		}
	}
}

// matrixSIR computes SIR_i = G_ii p_i / (Σ_{j≠i} G_ij p_j + η_i) (test hook)
// and returns the noise rise at user 0's receiver.
func (rp *replication) matrixSIR(p []float64, act []uint8) float64 {
	G, eta := rp.sh.hk.matrix, rp.sh.hk.eta
	for i := range p {
		I := eta[i]
		for j, x := range p {
			if j != i && (act == nil || act[j] != 0) {
				I += G[i][j] * x
			}
		}
		r := G[i][i] * p[i]
		if act != nil && act[i] == 0 {
			r = 0
		}
		rp.rx[i] = r
		rp.sir[i] = r / I
	}
	tot := eta[0]
	for j, x := range p {
		if act == nil || act[j] != 0 {
			tot += G[0][j] * x
		}
	}
	return tot / eta[0]
}
