package loop

import (
	"math"

	"github.com/fadeloop/fadeloop/fading"
)

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

	sirLayout, powLayout, riseLayout *histLayout // SIR-error ratio, Tx power (mW), noise rise
	nbins                            int
	binEdges                         []float64
	marginLin                        float64
	convW                            int
	convTolDB                        float64

	decorrSlots float64 // longest decorrelation time of a user, slots (decorrelationSlots)
	decorrWhat  string  // what that decorrelation time is (for the notes)
	batches     int     // batches per replication (effectiveBatches)
	batchNote   string  // why batches differs from run.batches, or ""
	withhold    bool    // one replication gives no intervals: too short for MinBatches batches (effectiveBatches)
	pool        *pool   // histograms pooled over replications (nil with one replication)
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
	s.sirLayout = layoutForDB(-48, 48, m)
	s.powLayout = layoutForDB(il.MinPowerDBm, il.MaxPowerDBm, m)
	s.powLayout.limitDB(il.MinPowerDBm, il.MaxPowerDBm) // Tx power never leaves [min, max]
	s.riseLayout = layoutForDB(0, 60, 9)
	s.marginLin = dbToLin(-sc.Run.OutageMarginDB)
	s.convW = max(1, int(math.Round(ConvergenceWindowS*s.rateHz)))
	s.convTolDB = ConvergenceToleranceDB
	if hk == nil || (hk.static == nil && hk.matrix == nil) { // hooks replace fading by static gains
		s.decorrSlots, s.decorrWhat = decorrelationSlots(sc, users, s.rateHz)
	}
	s.batches, s.batchNote, s.withhold = effectiveBatches(sc.Run.Batches, s.total-s.warm, s.decorrSlots, s.decorrWhat)
	// Distance bins: equal width over the users' distance range.
	s.nbins = sc.Run.DistanceBins
	if sc.Run.Replications > 1 {
		s.pool = newPool(s.n + s.nbins + 1)
	}
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

// repSeed is the seed of replication r: the run seed itself for r = 0, the
// SplitMix64 mix of seed + r·γ (fading.SplitMix64(seed, r−1)) otherwise.
func repSeed(seed uint64, r int) uint64 {
	if r == 0 {
		return seed
	}
	return fading.SplitMix64(seed, uint64(r-1))
}
