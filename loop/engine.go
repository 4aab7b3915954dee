package loop

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"sync"
	"sync/atomic"
	"time"

	"github.com/fadeloop/fadeloop/fading"
)

// EngineVersion identifies the engine that produced a Report; it changes
// whenever the same (scenario, seed) could give different figures. 1.2.0:
// one replication too short for two batches of 10 decorrelation times
// withholds its batch-means intervals, and one user's convergence time
// with one replication has none (values unchanged).
const EngineVersion = "fadeloop-loop/1.2.0"

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

// genBlockSlots is the number of slots of fading generated ahead per block
// (1024: fewer hand-overs between the slot loop and the workers than 512,
// measured about 5 % faster on the canonical cell). Large cells use
// shorter blocks (genBlockSlotsFor) so that a block holds at most
// genBlockUserSlots user-slots, as 512-slot blocks of 4096 users did.
const (
	genBlockSlots     = 1024
	genBlockUserSlots = 4096 * 512
)

// genBlockSlotsFor is the block length for n users: genBlockSlots, halved
// while the block holds more than genBlockUserSlots (not below 64).
func genBlockSlotsFor(n int) int {
	b := genBlockSlots
	for b > 64 && n*b > genBlockUserSlots {
		b /= 2
	}
	return b
}

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
	Users      []int // user indices (0-based, group order) to trace; at most MaxTracedUsers
	Decimation int   // keep one slot in Decimation, >= 1 (0: by SamplesPerUser, else 1)
	// SamplesPerUser, used when Decimation is 0, asks for about this many
	// samples per traced user; the decimation is TraceDecimation's. >= 0.
	SamplesPerUser int
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
	sc = sc.Clone()
	sc.Normalise()
	v := sc.Validate()
	if sc.MultiCell() && len(v) == 0 {
		v = append(v, Violation{"layout.sites", "a multi-cell scenario runs on the multi-cell engine (multicell.RunScenario), not loop.Run"})
	}
	if opts.Trace.Decimation < 0 {
		v = append(v, Violation{"trace.decimation", fmt.Sprintf("must be >= 1, got %d", opts.Trace.Decimation)})
	}
	if opts.Trace.SamplesPerUser < 0 {
		v = append(v, Violation{"trace.samples_per_user", fmt.Sprintf("must be >= 0, got %d", opts.Trace.SamplesPerUser)})
	}
	if len(opts.Trace.Users) > MaxTracedUsers {
		v = append(v, Violation{"trace.users", fmt.Sprintf("must list at most %d users, got %d", MaxTracedUsers, len(opts.Trace.Users))})
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
	if fz, ok := sh.preRunFeasibility(); !ok {
		return sh.infeasibleReport(fz, start), nil
	}
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
