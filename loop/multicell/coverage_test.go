package multicell

import (
	"context"
	"math"
	"sort"
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
// test tolerances are chosen"): with 4 replications (Student t over
// independent drops; the long-run value pools 40× as many replications)
// and, outside -short, with one replication (batch means, conditional on
// the drop; the long-run value is the same drop run 20× as long). Every
// interval holds its value and the noise rise stays ≥ 0 dB.
func TestIntervalCoverage(t *testing.T) {
	type cov struct {
		name  string
		m     int
		reps  int
		slots int64
		long  func(seed uint64) Config
	}
	cases := []cov{
		{"4-replications", 200, 4, 1500, func(uint64) Config { return coverageLayout(160, 1500, 1) }},
		{"1-replication", 80, 1, 3000, func(seed uint64) Config { return coverageLayout(1, 60000, seed) }},
	}
	if testing.Short() {
		cases = cases[:1]
		cases[0].m = 60
		cases[0].long = func(uint64) Config { return coverageLayout(80, 1500, 1) }
		if raceEnabled {
			cases[0].m = 20
			cases[0].long = func(uint64) Config { return coverageLayout(24, 1500, 1) }
		}
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var ref map[string]loop.Estimate
			if c.reps > 1 {
				long, err := Run(context.Background(), c.long(0))
				if err != nil {
					t.Fatal(err)
				}
				ref = coverageEstimates(long)
			}
			hits := map[string]int{}
			for k := 0; k < c.m; k++ {
				seed := uint64(5000 + k)
				r, err := Run(context.Background(), coverageLayout(c.reps, c.slots, seed))
				if err != nil {
					t.Fatal(err)
				}
				want := ref
				if c.reps == 1 {
					long, err := Run(context.Background(), c.long(seed))
					if err != nil {
						t.Fatal(err)
					}
					want = coverageEstimates(long)
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
			names := make([]string, 0, len(hits))
			for name := range coverageEstimates(&Report{}) {
				names = append(names, name)
			}
			sort.Strings(names)
			for _, name := range names {
				v := float64(hits[name]) / float64(c.m)
				t.Logf("%-20s coverage %.3f over %d runs (long-run value %.4g)", name, v, c.m, ref[name].Value)
				if v < minCov {
					t.Errorf("%s: coverage %.3f < %.3f (nominal 0.95, %d runs)", name, v, minCov, c.m)
				}
			}
		})
	}
}
