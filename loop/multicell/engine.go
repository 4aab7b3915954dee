package multicell

import (
	"context"
	"runtime"
	"sync"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
)

// The engine is split by stage: engine.go (entry point, state),
// drop.go (placing users, their channels), fill.go (the replication's
// slot loop and the work ahead — next block's fading, next shadowing
// update's gains, last block's statistics), share.go (that work cut into
// chunks shared with a helper goroutine), gains.go (shadowing, slow
// gains, open-loop estimate), activeset.go (active-set updates), slot.go
// (one slot: cell sums, SIRs, commands, outer loop, power update),
// record.go (what the slots record for the statistics), dbconv.go (dB
// conversions without log/exp calls) and stats.go (collection, intervals
// and the merged report).

// Random stream kinds of this package (fading.NewStream; values ≥ 200 are
// this package's, clear of fading's and loop's).
const (
	streamReplication fading.StreamKind = 200 + iota // seed of replication r: user −1, index r
	streamPlacement                                  // a user's position
	streamShadowing                                  // a user's shadowing (common and per-site parts)
	streamControl                                    // a user's estimation, command and block-error draws
)

// maxLegsPerUser spaces the fading-channel user numbers: leg slot l of user u
// fades with fading.NewChannel(cfg, replication seed, u·maxLegsPerUser + l).
const maxLegsPerUser = 8

// blockSlots is the number of slots of fading generated ahead per call
// (blocks also end at active-set updates). Each leg's channel state is
// visited once per block, cold in cache with thousands of legs: 128 slots
// used about 3 % less CPU than 64 in BenchmarkMultiCell1140 (32 and 16:
// more), for 2 × 128 × U × max_active × 8 bytes of fade sets. The report
// does not depend on it (TestLegStreamsOnSlotClock; compared at 64, 128
// and 160).
const blockSlots = 128

// fullSumSlots bounds the slots between two full recomputations of the
// cell sums (the incremental update in between accumulates rounding; see
// rep.updateSums).
const fullSumSlots = 16

// histogram of dB values: 0.05 dB bins over [histLoDB, histHiDB).
const (
	histLoDB   = -40.0
	histHiDB   = 60.0
	histBinsDB = 0.05
	histBins   = int((histHiDB - histLoDB) / histBinsDB)
)

// Run simulates every replication (an independent drop of users) and
// returns the report. It checks ctx between blocks of slots. Replications
// run in parallel on up to GOMAXPROCS goroutines and are merged in order, so
// the report does not depend on the core count.
func Run(ctx context.Context, cfg Config) (*Report, error) {
	cfg.Normalise()
	if vs := cfg.Validate(); len(vs) > 0 {
		return nil, vs
	}
	R := cfg.Run.Replications
	results := make([]*repResult, R)
	errs := make([]error, R)
	sem := make(chan struct{}, max(1, runtime.GOMAXPROCS(0)))
	var wg sync.WaitGroup
	for r := 0; r < R; r++ {
		wg.Add(1)
		sem <- struct{}{}
		go func(r int) {
			defer wg.Done()
			defer func() { <-sem }()
			defer func() {
				if p := recover(); p != nil {
					if pe, ok := p.(*loop.PanicError); ok {
						errs[r] = pe // a helper's, with the helper's stack
					} else {
						errs[r] = loop.NewPanicError(p)
					}
				}
			}()
			results[r], errs[r] = runReplication(ctx, cfg, r)
		}(r)
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	return merge(cfg, results), nil
}

// user is one user's state in a replication. The fields every slot reads
// come first, together (two cache lines per user per slot with up to
// three legs); the set-up, shadowing and fading-channel state follows.
type user struct {
	p        float64
	pDB      float64 // 10 log10(p), dBm (setP, or ± step_db per closed-loop step)
	target   float64 // 10^(targetDB/10)
	targetDB float64
	nLegs    int32
	best     int32                  // best cell (largest slow gain) of the active set
	act      [maxLegsPerUser]int8   // leg slots in use, ascending (act[:nLegs])
	leg      [maxLegsPerUser]legRun // per leg slot: what the slot loop reads and adds to
	legs     [maxLegsPerUser]int32  // cell of leg slot l, −1 when unused
	ctl      fading.FastStream      // estimation, command, block-error and open-loop draws
	edge     bool
	group    int
	x, y     float64
	pathDB   []float64         // per site: −path loss (dB), fixed
	siteLin  []float64         // per site: slow gain (path loss and shadowing), linear
	antLin   []float64         // per cell: antenna gain, linear
	shadowA  float64           // common shadowing part (dB, unit variance scaled later)
	shadowB  []float64         // per site part
	shadowK  float64           // AR(1) coefficient per shadowing update
	sh       fading.FastStream // shadowing: initial values and updates
	legCh    [maxLegsPerUser]*fading.Channel
	olCorrDB float64
	olEstDB  []float64 // history of the open-loop gain estimate, one per shadowing update
}

// legRun is a leg slot's cell and slow gain (copies set by refreshLegs,
// from which buildLegs makes rep.legs; between active-set updates the
// list's gains are the current ones and these may be older).
type legRun struct {
	c int32   // cell (copy of user.legs)
	g float64 // slow gain of the cell (copy of rep.slow)
}

// rep is one replication's working state.
type rep struct {
	cfg     Config
	g       *geometry
	users   []user
	U, C    int
	noiseMW float64
	pg      float64
	// slow is the slow gain (path loss, shadowing, antenna), user-major:
	// slow[u·C+c], linear.
	slow     []float64
	sums     []float64  // per cell: Σ_u p_u·slow[u·C+c] at this slot's powers, mW (updateSums)
	stale    bool       // sums must be recomputed in full (slow gains or powers set directly)
	sinceSum int        // slots since the last full recomputation of sums
	pPrev    []float64  // per user: the power of the last slot run, mW
	pCur     []float64  // per user: the power of the next slot to run, mW (= users[u].p after a slot)
	movers   []int32    // updateSums: the users that moved otherwise than the common factor
	moverD   []float64  // updateSums: their p' − b·p
	pFull    []float64  // fullSums: the users' powers in one array
	legs     legList    // the active-set legs, flat (legs.go)
	legSIR   []float64  // per user u and leg rank k: this slot's SIR at u·max_active + k (with estimation or command errors)
	slotU    []userSlot // per user: this slot's power, target, best SIR and combined command (legs.go)
	suReady  bool       // slotU holds this slot's powers and targets (set by the last slot's loop over users)
	legF     []float64  // per leg slot: FULL fading's gains of this slot (legGains), 1 without fast fading
	legAcc   []float64  // per leg slot u·max_active + l: block accumulator (sum of linear SIR)
	legBLER  []float64  // per leg of rep.legs, at a block end: the block's error probability (blockBLERs)
	legN     []int32    // per leg slot: slots in legAcc
	cmds     []int8     // delay lines of combined commands (+1 up, −1 down): user u's at [u·d, (u+1)·d), d = feedback_delay_slots + 1
	ups      int        // users whose power went up in the last slot
	downs    int        // users whose power went down in the last slot
	// fade is this block's fast fading of the active-set legs (SLOW_TOWARD_OTHERS),
	// slot-major: fade[k·fadeStride + u·legsPerUser + l] is the power gain
	// of user u's leg slot l in slot k of the block.
	fade        []float64
	fadeStride  int                 // U·legsPerUser
	legsPerUser int                 // leg slots with a fading channel: max_active
	fadeTmp     [2][]float64        // two legs' samples before fill.go spreads them: [0] the replication's goroutine, [1] the helper
	fillList    [2][]int32          // fillSet's legs in use (u·maxLegsPerUser + l), per goroutine as fadeTmp
	plans       [2]fading.PlanCache // interpolation plans shared by legs of the same speed, per goroutine
	legPos      []int64             // per leg slot u·legsPerUser + l: the slot its stream has reached
	rx          []float64           // received power per cell this slot, mW
	corr        []float64           // per cell: this slot's leg corrections Σ p·G·(F − 1), mW
	corrNext    []float64           // per cell: the next slot's, summed as the powers are set
	// corrReady: corr already holds this slot's corrections (summed in the last slot).
	corrReady bool
	own       []float64
	upLin     float64
	downLin   float64
	pmin      float64
	pmax      float64
	full      bool
	fullCh    []*fading.Channel // FULL mode: per (c, u)
	fullBuf   [][]float64
	stats     *collector
	marginLin float64      // 10^(−outage_margin_db/10): outage below target·marginLin
	edge      []float64    // per user: 1 at the cell edge, else 0 (user.edge, for the statistics)
	recs      [3]*blockRec // statistics records: a ring of three blocks (record.go, fill.go)
	rec       *blockRec    // this block's
	shadowSD  float64
	blockN    int   // slots in the current fading block
	blockT0   int64 // its first slot
	// Work ahead (fill.go): the next shadowing update's slow gains, the
	// two fade sets (this block's and the next), the helper and its jobs.
	slowNext  []float64
	fadeSets  [2][]float64
	helper    *helper
	jobs      jobs
	afterSlot func(t int64) // tests: called after each slot
	cands     []cand        // active-set evaluation, reused
	joiners   []int32       // leg slots u·maxLegsPerUser + l that joined at this block's start
	keep      []int
}

// cand is a candidate cell of an active set and its slow gain.
type cand struct {
	c int
	g float64
}

func runReplication(ctx context.Context, cfg Config, r int) (*repResult, error) {
	seed := fading.NewStream(cfg.Run.Seed, -1, r, streamReplication).Uint64()
	rp, err := newRep(cfg, seed, r)
	if err != nil {
		return nil, err
	}
	defer rp.startHelper()()
	if err := rp.run(ctx); err != nil {
		return nil, err
	}
	return rp.stats.result(rp), nil
}
