package loop

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestGroupFingers checks the per-group finger summary and what the engine
// simulates for each receiver model: EPA at 3.84 Mchip/s is two fingers
// (all taps up to 190 ns within one chip, 260 ns; see
// fading.TestResolvablePaths), seven with the ideal receiver; ETU with two
// fingers keeps the two strongest clusters (0..230 ns and 500 ns) and
// reports the power it leaves out.
func TestGroupFingers(t *testing.T) {
	lin := func(db float64) float64 { return math.Pow(10, db/10) }
	sc := CanonicalScenario()
	sc.Receiver.RakeFingers = RakeFingersChipResolved
	sc.Groups[0].CustomTaps = nil
	sc.Groups[0].Profile = "EPA"
	sc.Groups = append(sc.Groups, sc.Groups[0])
	sc.Groups[1].Profile = "ETU"
	sc.Groups[1].LOS, sc.Groups[1].RicianKDB = true, 6
	sc.Receiver.MaxFingers = 2
	if v := sc.Validate(); len(v) != 0 {
		t.Fatal(v)
	}
	gf := groupFingers(sc)
	etuTotal := 3*lin(-1) + 3*lin(0) + lin(-3) + lin(-5) + lin(-7)
	kept := 3*lin(-1) + 2*lin(0) + lin(0)
	// LOS on ETU's first tap (−1 dB, K = 6 dB) merged with the other four
	// taps of the first cluster: K' = p0·K/(K+1) / (p0/(K+1) + rest).
	k := lin(6)
	p0 := lin(-1)
	kPrime := 10 * math.Log10(p0*k/(k+1)/(p0/(k+1)+2*lin(-1)+2*lin(0)))
	want := []GroupFingers{
		{Group: 0, Taps: 7, ResolvablePaths: 2, Fingers: 2, CapturedPowerDB: 0},
		{Group: 1, Taps: 9, ResolvablePaths: 5, Fingers: 2, CapturedPowerDB: 10 * math.Log10(kept/etuTotal), FirstFingerKDB: kPrime},
	}
	for i := range want {
		g, w := gf[i], want[i]
		if g.Group != w.Group || g.Taps != w.Taps || g.ResolvablePaths != w.ResolvablePaths || g.Fingers != w.Fingers ||
			math.Abs(g.CapturedPowerDB-w.CapturedPowerDB) > 1e-9 || math.Abs(g.FirstFingerKDB-w.FirstFingerKDB) > 1e-9 {
			t.Errorf("group %d: %+v, want %+v", i, g, w)
		}
	}
	if got := groupRicianKDB(sc, 1); math.Abs(got-kPrime) > 1e-9 {
		t.Errorf("engine K of the ETU group %g dB, want %g", got, kPrime)
	}
	if got := groupCapturedLin(sc, 1); math.Abs(got-kept/etuTotal) > 1e-12 {
		t.Errorf("engine captured share %g, want %g", got, kept/etuTotal)
	}
	if got := sc.Cost(); got != int64(2*64*2*90000) {
		t.Errorf("Cost %d, want groups × users × fingers × slots = %d", got, 2*64*2*90000)
	}
	// The ideal receiver: every tap a finger, K and power unchanged.
	sc.Receiver.RakeFingers = RakeFingersIdealEveryTap
	gf = groupFingers(sc)
	if gf[0].Fingers != 7 || gf[0].ResolvablePaths != 2 || gf[1].Fingers != 9 || gf[1].CapturedPowerDB != 0 || gf[1].FirstFingerKDB != 6 {
		t.Errorf("ideal receiver: %+v", gf)
	}
	if p := groupProfile(sc, 1); len(p.Taps) != 9 {
		t.Errorf("ideal receiver simulates %d taps of ETU, want 9", len(p.Taps))
	}
}

// TestEngineFingerDiversity runs one user at fixed power over four equal
// taps in two pairs 100 ns apart (1 µs between the pairs): at 3.84 Mchip/s
// the chip-resolved receiver sees two equal fingers, so its outage is the
// two-branch MRC law Gamma(2, 1) CDF at 10^(−x/10), x the per-branch mean
// SIR above the threshold; the ideal every-tap receiver sees four branches,
// Gamma(4, 1) (Proakis, Digital Communications (memory); gonum distuv).
// Tolerance as in TestNoPowerControlOutage: 1.5× the Wilson half-width.
func TestEngineFingerDiversity(t *testing.T) {
	slots := int64(300000)
	if testing.Short() {
		slots = 60000
	}
	const xDB = 3
	for _, c := range []struct {
		rf       RakeFingers
		branches int
	}{{RakeFingersChipResolved, 2}, {RakeFingersIdealEveryTap, 4}} {
		sc := baseScenario(1, slots)
		sc.Receiver.RakeFingers = c.rf
		sc.Groups[0].Profile = ""
		sc.Groups[0].CustomTaps = []Tap{{DelayNs: 0}, {DelayNs: 100}, {DelayNs: 1000}, {DelayNs: 1100}}
		sc.Groups[0].Speeds[0].SpeedKmh = 100
		sc.InnerLoop.Mode = InnerModeFixedPower
		sc.InnerLoop.FixedPowerDBm = 0
		sc.Receiver.OtherCellRatio = 0
		us, _ := placeUsers(sc)
		meanDB := linToDB(sc.Receiver.ProcessingGain()) - us[0].pathLossDB - sc.Receiver.NoiseDBm()
		branchDB := meanDB - linToDB(float64(c.branches))
		sc.OuterLoop.InitialTargetDB = branchDB - xDB + sc.Run.OutageMarginDB
		rep := mustRun(t, sc, nil, RunOptions{})
		if f := rep.GroupFingers[0].Fingers; f != c.branches {
			t.Fatalf("%s: %d fingers, want %d", c.rf, f, c.branches)
		}
		want := distuv.Gamma{Alpha: float64(c.branches), Beta: 1}.CDF(dbToLin(-xDB))
		e := rep.Aggregate.OutageProbability
		if !within(e, want, 1.5) {
			t.Errorf("%s: outage %.5f (CI %.5f..%.5f), %d-branch theory %.5f", c.rf, e.Value, e.CILow, e.CIHigh, c.branches, want)
		}
	}
}
