package multicell

import (
	"context"
	"fmt"
	"math"
	"reflect"
	"slices"
	"sort"
	"strings"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
)

// coverageLayout is a 7-site omni layout with wrap-around, 8 users per
// cell at 120 km/h (shadowing decorrelates in ~900 slots), 8 dB
// shadowing and soft handover: small enough for hundreds of runs.
func coverageLayout(reps int, slots int64, seed uint64) Config {
	return Config{
		Layout:    Layout{Sites: 7, SectorsPerSite: 1, InterSiteDistanceM: 1000, WrapAround: true},
		Groups:    []Group{{CountPerCell: 8, SpeedKmh: 120}},
		Channel:   Channel{ShadowingDB: 8, SiteCorrelation: 0.5},
		Handover:  Handover{WindowDB: 4, HysteresisDB: 1, MaxActive: 2},
		OuterLoop: loop.OuterLoop{InitialTargetDB: 5},
		Run:       RunSettings{Slots: slots, WarmupSlots: slots / 10, Replications: reps, Seed: seed},
	}
}

// coverageEstimates are the layout-wide figures whose intervals are
// checked, by name: the noise-rise percentile (the interval this test was
// written for) and the means and proportions beside it.
func coverageEstimates(r *Report) map[string]loop.Estimate {
	return map[string]loop.Estimate{
		"noise_rise_p95_db":  r.NoiseRiseP95DB,
		"noise_rise_db":      r.Overall.NoiseRiseDB,
		"other_to_own":       r.Overall.OtherToOwn,
		"outage_probability": r.Overall.OutageProbability,
	}
}

// TestIntervalCoverage: the 95 % intervals of the layout-wide figures
// cover their long-run value in 95 % of independent runs, within the
// binomial tolerance 4·sqrt(0.95·0.05/M) for M runs (DEVELOPERS.md "How
// test tolerances are chosen"), with 4 replications (Student t over
// independent drops; the long-run value pools 40× as many replications,
// 20× under -short). Every interval holds its value, has a width and the
// noise rise stays ≥ 0 dB. One replication: TestOneReplicationCoverage.
func TestIntervalCoverage(t *testing.T) {
	type cov struct {
		name     string
		m        int   // runs
		reps     int   // replications per run
		slots    int64 // slots per replication
		longReps int   // replications of the long-run value
	}
	cases := []cov{{"4-replications", 200, 4, 1500, 160}}
	if testing.Short() {
		cases[0].m, cases[0].longReps = 60, 80
		if raceEnabled {
			cases[0].m, cases[0].longReps = 8, 12 // a smoke run: the check is the run without -race
		}
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			long, err := Run(context.Background(), coverageLayout(c.longReps, c.slots, 1))
			if err != nil {
				t.Fatal(err)
			}
			want := coverageEstimates(long)
			hits := map[string]int{}
			for k := 0; k < c.m; k++ {
				r, err := Run(context.Background(), coverageLayout(c.reps, c.slots, uint64(5000+k)))
				if err != nil {
					t.Fatal(err)
				}
				for name, e := range coverageEstimates(r) {
					if !(e.CILow <= e.Value && e.Value <= e.CIHigh) || e.CIHigh == e.CILow {
						t.Fatalf("run %d: %s interval %+v does not hold its value or has zero width", k, name, e)
					}
					if (name == "noise_rise_p95_db" || name == "noise_rise_db") && e.CILow < 0 {
						t.Fatalf("run %d: %s interval %+v below 0 dB", k, name, e)
					}
					if w := want[name].Value; e.CILow <= w && w <= e.CIHigh {
						hits[name]++
					}
				}
			}
			minCov := 0.95 - 4*math.Sqrt(0.95*0.05/float64(c.m))
			for _, name := range coverageNames() {
				v := float64(hits[name]) / float64(c.m)
				t.Logf("%-20s coverage %.3f over %d runs (long-run value %.4g)", name, v, c.m, want[name].Value)
				if v < minCov {
					t.Errorf("%s: coverage %.3f < %.3f (nominal 0.95, %d runs)", name, v, minCov, c.m)
				}
			}
		})
	}
}

// oneRepLayout is coverageLayout with one replication whose slowest
// process is the shadowing at 120 km/h over d_c = 2 m (90 slots at
// 1500 Hz; decorrelationSlots), the active set re-evaluated every 15 slots
// and 4 users per cell: measured slots 3600 hold exactly minBatchGroups
// groups of groupDecorrelationTimes decorrelation times, the fewest that
// give an interval (the case with the largest bias, (1+1/k)·τ/b).
func oneRepLayout(slots int64, seed uint64) Config {
	c := coverageLayout(1, slots, seed)
	c.Groups[0].CountPerCell = 4
	c.Channel.DecorrelationM = 2
	c.Handover.UpdateSlots = 15
	c.Run.WarmupSlots = 300
	return c
}

// TestOneReplicationCoverage: with one replication an interval estimates
// the drop's long-run value (Report), here the same drop (same seed,
// same streams) run 10× as long. The long run contains the short one,
// so the difference of the two has variance (1−1/L)·σ² for L = 10
// instead of σ² (the other 9 tenths are independent of the first: each
// spans 400 decorrelation times); each interval's half-widths are scaled
// by sqrt(1−1/L) before the comparison, which restores the nominal 95 %.
// The coverage must reach 0.95 − 4·sqrt(0.95·0.05/M) for every
// layout-wide figure, with the run at the shortest length that gives
// intervals (oneRepLayout). Every interval holds its value and stays in
// range (proportions in [0, 1], noise rise ≥ 0 dB). Measured (M = 200):
// 0.930 noise_rise_db, 0.980 noise_rise_p95_db, 0.950 other_to_own, 1.000
// outage_probability; before the group-length rule, with groups of
// 180-slot batches merged only on the lag-1 check, other_to_own covered
// 0.850 here.
func TestOneReplicationCoverage(t *testing.T) {
	const warm, measured, L = 300, 3600, 10
	m := 200
	if testing.Short() {
		m = 60
		if raceEnabled {
			m = 4 // a smoke run: the check is the run without -race
		}
	}
	if dc, _ := decorrelationSlots(normalised(oneRepLayout(warm+measured, 1))); measured != minBatchGroups*groupDecorrelationTimes*dc {
		t.Fatalf("oneRepLayout: decorrelation time %g slots, want %d measured slots to hold exactly %d groups", dc, measured, minBatchGroups)
	}
	shrink := math.Sqrt(1 - 1.0/L)
	hits := map[string]int{}
	for k := 0; k < m; k++ {
		seed := uint64(7000 + k)
		r, err := Run(context.Background(), oneRepLayout(warm+measured, seed))
		if err != nil {
			t.Fatal(err)
		}
		long, err := Run(context.Background(), oneRepLayout(warm+L*measured, seed))
		if err != nil {
			t.Fatal(err)
		}
		want := coverageEstimates(long)
		for name, e := range coverageEstimates(r) {
			if !(e.CILow <= e.Value && e.Value <= e.CIHigh) || e.CIHigh == e.CILow {
				t.Fatalf("run %d: %s interval %+v does not hold its value or has zero width", k, name, e)
			}
			if e.CILow < 0 || (name == "outage_probability" && e.CIHigh > 1) {
				t.Fatalf("run %d: %s interval %+v leaves its range", k, name, e)
			}
			lo, hi := e.Value-shrink*(e.Value-e.CILow), e.Value+shrink*(e.CIHigh-e.Value)
			if w := want[name].Value; lo <= w && w <= hi {
				hits[name]++
			}
		}
	}
	minCov := 0.95 - 4*math.Sqrt(0.95*0.05/float64(m))
	for _, name := range coverageNames() {
		v := float64(hits[name]) / float64(m)
		t.Logf("%-20s coverage %.3f over %d runs of one replication", name, v, m)
		if v < minCov {
			t.Errorf("%s: coverage %.3f < %.3f (nominal 0.95, %d runs)", name, v, minCov, m)
		}
	}
}

// coverageNames are coverageEstimates' names, sorted.
func coverageNames() []string {
	names := make([]string, 0, 4)
	for name := range coverageEstimates(&Report{}) {
		names = append(names, name)
	}
	sort.Strings(names)
	return names
}

// normalised is c with its defaults filled.
func normalised(c Config) Config {
	c.Normalise()
	return c
}

// TestDecorrelationSlots: the slowest process of a replication, in slots
// at 1500 Hz: shadowing d_c/v (Gudmundson 1991: 50 m at 120 km/h =
// 33.3 m/s is 1.5 s, 2250 slots; at 3 km/h 60 s, 90000 slots), fast fading
// 0.4/f_D (f_D = v·f_c/c = 5.56 Hz at 3 km/h and 2 GHz: 108 slots), the
// active-set update interval (default 300 slots) and the outer loop
// block_slots/bler_target (15/0.01 = 1500 slots).
func TestDecorrelationSlots(t *testing.T) {
	base := func(kmh, shadowDB, dcM float64, update int) Config {
		c := coverageLayout(1, 3000, 1)
		c.Groups[0].SpeedKmh = kmh
		c.Channel.ShadowingDB = shadowDB
		c.Channel.DecorrelationM = dcM
		c.Handover.UpdateSlots = update
		return c
	}
	withOL := func(c Config, p float64) Config {
		c.OuterLoop.Enabled, c.OuterLoop.BLERTarget, c.OuterLoop.BlockSlots = true, p, 15
		return c
	}
	slow := base(120, 8, 50, 0)
	slow.Groups = append(slow.Groups, Group{Name: "walkers", CountPerCell: 2, SpeedKmh: 3})
	cases := []struct {
		name string
		cfg  Config
		want float64
		what string
	}{
		{"shadowing 120 km/h", base(120, 8, 50, 0), 2250, "shadowing of group 0 at 120 km/h"},
		{"slowest group", slow, 90000, "shadowing of group walkers at 3 km/h"},
		{"0 km/h: shadowing is part of the drop", base(0, 8, 50, 0), 300, "active-set update interval"},
		{"no shadowing: fast fading", base(3, 0, 50, 15), 0.4 / (3 / 3.6 * 2e9 / 299792458) * 1500, "fast fading of group 0 at 3 km/h"},
		{"no shadowing, fast: active set", base(120, 0, 50, 0), 300, "active-set update interval"},
		{"outer loop", withOL(base(120, 8, 5, 0), 0.01), 1500, "outer loop"},
		{"shadowing slower than outer loop", withOL(base(120, 8, 50, 0), 0.01), 2250, "shadowing"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got, what := decorrelationSlots(normalised(c.cfg))
			if math.Abs(got-c.want) > 1e-6*c.want || !strings.Contains(what, c.what) {
				t.Errorf("decorrelationSlots = %g (%s), want %g (%s)", got, what, c.want, c.what)
			}
		})
	}
}

// TestBatchGroups: consecutive batches merge until a group spans the
// minimum; fewer than minBatchGroups such groups give nil (no interval);
// leftovers join the last group; a trend (lag-1 autocorrelation above
// 2/√k) halves the groups while it shows and 2·minBatchGroups remain.
func TestBatchGroups(t *testing.T) {
	batches := func(slots []float64, trend bool) []sums {
		b := make([]sums, len(slots))
		for i, s := range slots {
			b[i] = newSums(1)
			b[i].slots, b[i].userSlots, b[i].ownMW, b[i].otherMW = s, s, s, s/2
			x := float64(i % 2) // alternating: negative lag-1
			if trend {
				x = float64(i)
			}
			b[i].noiseRiseDB = s * (1 + x)
		}
		return b
	}
	even := func(n int, s float64) []float64 {
		xs := make([]float64, n)
		for i := range xs {
			xs[i] = s
		}
		return xs
	}
	uneven := even(20, 180)
	uneven[0] = 179 // 3599 slots: the first group needs 6 batches
	cases := []struct {
		name     string
		slots    []float64
		trend    bool
		minSlots float64
		want     [][2]int
	}{
		{"exactly 4 groups", even(20, 180), false, 900, [][2]int{{0, 5}, {5, 10}, {10, 15}, {15, 20}}},
		{"one slot short", uneven, false, 900, nil},
		{"whole batches: 7 of 514 give 3 groups of 900", even(7, 514), false, 900, nil},
		{"leftover joins the last group", even(20, 100), false, 250, [][2]int{{0, 3}, {3, 6}, {6, 9}, {9, 12}, {12, 15}, {15, 20}}},
		// A linear trend: lag-1 0.81 > 2/√16 at 16 groups, 0.625 < 2/√8 at 8.
		{"trend halves 16 to 8", even(16, 100), true, 100, [][2]int{{0, 2}, {2, 4}, {4, 6}, {6, 8}, {8, 10}, {10, 12}, {12, 14}, {14, 16}}},
		{"no trend keeps 16", even(16, 100), false, 100, func() [][2]int {
			g := make([][2]int, 16)
			for i := range g {
				g[i] = [2]int{i, i + 1}
			}
			return g
		}()},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got := batchGroups(batches(c.slots, c.trend), 1, c.minSlots)
			if !reflect.DeepEqual(got, c.want) {
				t.Errorf("batchGroups = %v, want %v", got, c.want)
			}
		})
	}
}

// reportEstimates lists every loop.Estimate of a report by field path
// (Overall, every cell, NoiseRiseP95DB).
func reportEstimates(r *Report) map[string]loop.Estimate {
	out := map[string]loop.Estimate{}
	est := reflect.TypeOf(loop.Estimate{})
	var walk func(path string, v reflect.Value)
	walk = func(path string, v reflect.Value) {
		switch {
		case v.Type() == est:
			out[path] = v.Interface().(loop.Estimate)
		case v.Kind() == reflect.Struct:
			for i := 0; i < v.NumField(); i++ {
				if v.Type().Field(i).IsExported() {
					walk(path+"."+v.Type().Field(i).Name, v.Field(i))
				}
			}
		case v.Kind() == reflect.Slice:
			for i := 0; i < v.Len(); i++ {
				walk(fmt.Sprintf("%s[%d]", path, i), v.Index(i))
			}
		}
	}
	walk("overall", reflect.ValueOf(r.Overall))
	walk("cells", reflect.ValueOf(r.Cells))
	walk("noise_rise_p95_db", reflect.ValueOf(r.NoiseRiseP95DB))
	return out
}

// TestOneReplicationWithheld: one replication gives intervals exactly when
// minBatchGroups groups of whole batches, each at least
// groupDecorrelationTimes decorrelation times, fit in the measured run;
// otherwise every interval of the report is withheld (NaN bounds) with the
// same Values (the same drop and run with a different batch count), and
// the note names the slowest process and the run length needed.
func TestOneReplicationWithheld(t *testing.T) {
	old := coverageLayout(1, 3000, 3) // the run measured at 0.47–0.67 coverage before: 120 km/h, d_c 50 m
	old.Groups[0].CountPerCell = 4
	sevenBatches := oneRepLayout(300+3600, 3)
	sevenBatches.Run.Batches = 7 // batches of 514 slots: only 3 groups of ≥ 900
	cases := []struct {
		name  string
		cfg   Config
		given bool
		note  string
	}{
		{"120 km/h, d_c 50 m, 2700 slots", old, false, "2700 measured slots span 1.2 decorrelation times of the slowest process, the shadowing of group 0 at 120 km/h (50 m / 33.3 m/s = 2250 slots); an interval over time within one drop needs 4 batch groups of 10 decorrelation times, at least 90000 measured slots"},
		{"4 groups of 900 slots", oneRepLayout(300+3600, 3), true, "Student t over 4 batch groups, each at least 10 decorrelation times (90 slots)"},
		{"7 batches: 3 groups", sevenBatches, false, "at least 3600 measured slots"},
		{"one slot short", oneRepLayout(300+3599, 3), false, "3599 measured slots"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			r, err := Run(context.Background(), c.cfg)
			if err != nil {
				t.Fatal(err)
			}
			lr := ToLoopReport(loop.Scenario{}, r)
			if !slices.ContainsFunc(lr.Notes, func(n string) bool { return strings.Contains(n, c.note) }) {
				t.Errorf("no note containing %q in %q", c.note, lr.Notes)
			}
			for path, e := range reportEstimates(r) {
				switch {
				case !c.given && !(math.IsNaN(e.CILow) && math.IsNaN(e.CIHigh)):
					t.Errorf("%s: interval %+v given, want withheld", path, e)
				case c.given && !math.IsNaN(e.Value) && !(e.CILow <= e.Value && e.Value <= e.CIHigh):
					t.Errorf("%s: interval %+v does not hold its value", path, e)
				}
			}
			for name, e := range coverageEstimates(r) {
				if math.IsNaN(e.Value) || math.IsInf(e.Value, 0) {
					t.Errorf("%s: value %g, want finite", name, e.Value)
				}
			}
		})
	}
	// The same drop and run, 20 or 7 batches: the same values (to the
	// rounding of summing the batches in another order, 1e-12 relative),
	// the interval given or withheld.
	a, err := Run(context.Background(), oneRepLayout(300+3600, 3))
	if err != nil {
		t.Fatal(err)
	}
	b, err := Run(context.Background(), sevenBatches)
	if err != nil {
		t.Fatal(err)
	}
	ea, eb := reportEstimates(a), reportEstimates(b)
	for path, e := range ea {
		if v := eb[path].Value; !(math.Abs(v-e.Value) <= 1e-12*math.Abs(e.Value)) && !(math.IsNaN(v) && math.IsNaN(e.Value)) {
			t.Errorf("%s: value %g with 20 batches, %g with 7", path, e.Value, v)
		}
	}
}

// reportText is every field of a report, exported or not, as text: a
// comparison that holds NaN (a withheld interval's bounds, a handover
// state without slots), which encoding/json refuses.
func reportText(r *Report) []byte {
	return fmt.Appendf(nil, "%+v", *r)
}
