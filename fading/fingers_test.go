package fading

import (
	"errors"
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestResolvablePaths checks the number of paths each built-in profile
// resolves at the UTRA FDD chip rate 3.84 Mchip/s (T_c = 260.4 ns) and the
// IS-95 chip rate 1.2288 Mchip/s (T_c = 813.8 ns). The expected counts are
// derived by hand from the tap delays of 3GPP TS 36.101 Annex B and ITU-R
// M.1225 (memory; the tables are checked in TestBuiltinProfiles) with the
// greedy rule of ResolveFingers (a finger takes the taps less than one chip
// after its first tap):
//
//	EPA  0..190 | 410                                   -> 2;  all within 814 ns -> 1
//	EVA  0,30,150 | 310,370 | 710 | 1090 | 1730 | 2510  -> 6;  0..710 | 1090,1730 | 2510 -> 3
//	ETU  0..230 | 500 | 1600 | 2300 | 5000              -> 5;  0..500 | 1600,2300 | 5000 -> 3
//	PEDA 0,110,190 | 410                                -> 2;  1
//	VEHA every gap >= 310 ns                            -> 6;  0,310,710 | 1090,1730 | 2510 -> 3
func TestResolvablePaths(t *testing.T) {
	cases := []struct {
		name        string
		at384, at12 int
	}{
		{"FLAT", 1, 1}, {"EPA", 2, 1}, {"EVA", 6, 3}, {"ETU", 5, 3}, {"PEDA", 2, 1}, {"VEHA", 6, 3},
	}
	if len(cases) != len(BuiltinProfileNames()) {
		t.Fatalf("table covers %d profiles, there are %d", len(cases), len(BuiltinProfileNames()))
	}
	for _, tc := range cases {
		p, err := BuiltinProfile(tc.name)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range []struct {
			chip float64
			want int
		}{{3.84e6, tc.at384}, {1.2288e6, tc.at12}} {
			fs, err := ResolveFingers(p, r.chip, 0, false, 0)
			if err != nil {
				t.Fatalf("%s at %g: %v", tc.name, r.chip, err)
			}
			if fs.Resolvable != r.want || len(fs.Profile.Taps) != r.want {
				t.Errorf("%s at %g chip/s: %d resolvable, %d fingers; want %d", tc.name, r.chip, fs.Resolvable, len(fs.Profile.Taps), r.want)
			}
			if math.Abs(fs.CapturedFraction-1) > 1e-12 {
				t.Errorf("%s at %g chip/s: captured %g without a finger limit, want 1", tc.name, r.chip, fs.CapturedFraction)
			}
		}
	}
}

// TestResolveFingersPowers checks merged powers, the finger limit and the
// Rician K of a merged LOS finger against values computed by hand from the
// model stated on ResolveFingers.
func TestResolveFingersPowers(t *testing.T) {
	lin := func(db float64) float64 { return math.Pow(10, db/10) }
	// EPA at 3.84 Mchip/s: the first six taps form one finger, 410 ns the
	// second. Powers relative to the total of the seven taps.
	epa, _ := BuiltinProfile("EPA")
	fs, err := ResolveFingers(epa, 3.84e6, 4, false, 0)
	if err != nil {
		t.Fatal(err)
	}
	total := 0.0
	for _, db := range []float64{0, -1, -2, -3, -8, -17.2, -20.8} {
		total += lin(db)
	}
	first := (lin(0) + lin(-1) + lin(-2) + lin(-3) + lin(-8) + lin(-17.2)) / total
	if got := lin(fs.Profile.Taps[0].PowerDB); math.Abs(got-first) > 1e-12 || fs.Profile.Taps[0].DelayNs != 0 {
		t.Errorf("EPA finger 0: %+v, want power %g at 0 ns", fs.Profile.Taps[0], first)
	}
	if got := lin(fs.Profile.Taps[1].PowerDB); math.Abs(got-lin(-20.8)/total) > 1e-12 || fs.Profile.Taps[1].DelayNs != 410 {
		t.Errorf("EPA finger 1: %+v, want power %g at 410 ns", fs.Profile.Taps[1], lin(-20.8)/total)
	}

	// ETU at 3.84 Mchip/s has 5 clusters; with 4 fingers the weakest
	// (5000 ns, −7 dB) is dropped.
	etu, _ := BuiltinProfile("ETU")
	fs, err = ResolveFingers(etu, 3.84e6, 4, false, 0)
	if err != nil {
		t.Fatal(err)
	}
	etuTotal := 3*lin(-1) + 3*lin(0) + lin(-3) + lin(-5) + lin(-7)
	if fs.Resolvable != 5 || len(fs.Profile.Taps) != 4 || fs.Profile.Taps[3].DelayNs != 2300 {
		t.Errorf("ETU with 4 fingers: %d resolvable, fingers %+v", fs.Resolvable, fs.Profile.Taps)
	}
	if want := 1 - lin(-7)/etuTotal; math.Abs(fs.CapturedFraction-want) > 1e-12 {
		t.Errorf("ETU captured fraction %g, want %g", fs.CapturedFraction, want)
	}

	// LOS: two equal taps 100 ns apart merge; K = 10 dB on the first tap.
	// Specular 0.5·10/11, diffuse 0.5/11 + 0.5, K' = 10/12 = −0.792 dB.
	two := Profile{Taps: []Tap{{0, 0}, {100, 0}}}
	fs, err = ResolveFingers(two, 3.84e6, 4, true, 10)
	if err != nil {
		t.Fatal(err)
	}
	if want := 10 * math.Log10(10.0/12); math.Abs(fs.RicianKDB-want) > 1e-9 {
		t.Errorf("merged LOS K = %g dB, want %g", fs.RicianKDB, want)
	}
	// Resolved alone (T_c = 50 ns), the LOS tap keeps its K.
	if fs, _ := ResolveFingers(two, 20e6, 4, true, 10); fs.Resolvable != 2 || math.Abs(fs.RicianKDB-10) > 1e-9 {
		t.Errorf("at 20 Mchip/s: %d resolvable, K = %g dB; want 2 and 10 dB", fs.Resolvable, fs.RicianKDB)
	}

	// The LOS finger is kept even when weaker than the others.
	weakLOS := Profile{Taps: []Tap{{0, -10}, {1000, 0}, {2000, 0}}}
	fs, _ = ResolveFingers(weakLOS, 3.84e6, 2, true, 0)
	if len(fs.Profile.Taps) != 2 || fs.Profile.Taps[0].DelayNs != 0 || fs.Profile.Taps[1].DelayNs != 1000 {
		t.Errorf("weak LOS finger with a limit of 2: fingers %+v, want 0 and 1000 ns", fs.Profile.Taps)
	}
	fs, _ = ResolveFingers(weakLOS, 3.84e6, 2, false, 0)
	if len(fs.Profile.Taps) != 2 || fs.Profile.Taps[0].DelayNs != 1000 || fs.Profile.Taps[1].DelayNs != 2000 {
		t.Errorf("no LOS, limit 2: fingers %+v, want 1000 and 2000 ns", fs.Profile.Taps)
	}

	// Bad input names the field.
	var pe *ParamError
	if _, err := ResolveFingers(two, 0, 4, false, 0); !errors.As(err, &pe) || pe.Param != "ChipRateHz" {
		t.Errorf("chip rate 0: %v", err)
	}
	if _, err := ResolveFingers(two, math.NaN(), 4, false, 0); !errors.As(err, &pe) || pe.Param != "ChipRateHz" {
		t.Errorf("chip rate NaN: %v", err)
	}
	if _, err := ResolveFingers(Profile{}, 3.84e6, 4, false, 0); err == nil {
		t.Error("empty profile accepted")
	}
	// Extreme relative powers stay a valid profile (no panic).
	if _, err := ResolveFingers(Profile{Taps: []Tap{{0, 300}, {1000, -300}}}, 3.84e6, 4, false, 0); err != nil {
		t.Errorf("extreme powers: %v", err)
	}
}

// TestMergedDiversity checks that a merged channel has the diversity of its
// resolvable paths, not of its taps: four equal taps in two pairs 100 ns
// apart, 900 ns between the pairs, give at 3.84 Mchip/s two equal fingers,
// and the combined gain of two equal-power independent Rayleigh branches
// (unit total mean) is Gamma(shape 2, rate 2) (maximal-ratio combining of L
// equal branches: Gamma(L, L); Proakis, Digital Communications (memory)),
// compared with gonum's distuv.Gamma CDF. Each link is a static channel
// (one independent draw per link). Tolerance: 4 standard errors of a
// proportion, √(p(1−p)/n) (DEVELOPERS.md); the test also checks that the
// four-branch law Gamma(4, 4) of the unmerged taps lies outside it, so it
// can tell the two apart.
func TestMergedDiversity(t *testing.T) {
	n := 6000
	if raceEnabled {
		n = 3000
	}
	p := Profile{Taps: []Tap{{0, 0}, {100, 0}, {1000, 0}, {1100, 0}}}
	fs, err := ResolveFingers(p, 3.84e6, 4, false, 0)
	if err != nil {
		t.Fatal(err)
	}
	if len(fs.Profile.Taps) != 2 || math.Abs(fs.Profile.Taps[0].PowerDB-fs.Profile.Taps[1].PowerDB) > 1e-12 {
		t.Fatalf("fingers %+v, want two of equal power", fs.Profile.Taps)
	}
	g := make([]float64, n)
	buf := make([]float64, 1)
	for u := 0; u < n; u++ {
		ch, err := NewChannel(ChannelConfig{SampleRateHz: 1500, Profile: fs.Profile}, 20261202, u)
		if err != nil {
			t.Fatal(err)
		}
		ch.FillGains(buf)
		g[u] = buf[0]
	}
	two := distuv.Gamma{Alpha: 2, Beta: 2}
	four := distuv.Gamma{Alpha: 4, Beta: 4}
	for _, x := range []float64{0.1, 0.3, 1} {
		k := 0
		for _, v := range g {
			if v < x {
				k++
			}
		}
		emp := float64(k) / float64(n)
		want := two.CDF(x)
		tol := 4 * math.Sqrt(want*(1-want)/float64(n))
		if math.Abs(emp-want) > tol {
			t.Errorf("P(g < %g) = %.4f, Gamma(2,2) CDF %.4f ± %.4f", x, emp, want, tol)
		}
		if x == 0.1 && math.Abs(four.CDF(x)-want) <= tol {
			t.Errorf("test cannot tell 2 from 4 branches at %g: Gamma(4,4) %.4f vs %.4f ± %.4f", x, four.CDF(x), want, tol)
		}
	}
}
