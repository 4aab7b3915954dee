package multicell

import (
	"math"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
)

// TestShadowingAtDefaultInterval: with shadowing_slots left at its default
// (loop.ShadowingSlotsFor: an update each d_c/100 travelled), a user's
// shadowing toward a site, sampled at the updates, has the Gudmundson
// autocorrelation exp(−Δd/d_c) (Gudmundson, Electron. Lett. 27(23), 1991):
// exp(−1) = 0.368 after d_c travelled, exp(−0.2) = 0.819 after d_c/5; its
// correlation between two sites is site_correlation (0.5, common
// practice); its standard deviation is σ (8 dB). Ensemble over 280
// independent users, one pair per user and lag window: the correlation
// estimates' standard error is about (1 − r²)/√N ≤ 0.015 (N ≥ 4000 pairs,
// consecutive windows of one user correlated by exp(−2)), so ±0.05 is
// more than three standard errors.
func TestShadowingAtDefaultInterval(t *testing.T) {
	cfg := Config{
		Layout:  Layout{Sites: 7, SectorsPerSite: 1, InterSiteDistanceM: 1000, WrapAround: true},
		Groups:  []Group{{CountPerCell: 40, SpeedKmh: 30}},
		Channel: Channel{ShadowingDB: 8, SiteCorrelation: 0.5},
		Run:     RunSettings{Slots: 1000, Seed: 7},
	}
	cfg.Normalise()
	if want := loop.ShadowingSlotsFor(50, 30, 1500); cfg.Channel.ShadowingSlots != want || want != 90 {
		t.Fatalf("default shadowing_slots = %d, ShadowingSlotsFor = %d, want 90 (0.5 m at 30 km/h, 1500 Hz)", cfg.Channel.ShadowingSlots, want)
	}
	rp, err := newRep(cfg, 1, 0)
	if err != nil {
		t.Fatal(err)
	}
	const perDc = loop.ShadowingStepsPerDecorrelation // updates per d_c travelled
	const windows = 20
	a, b := math.Sqrt(cfg.Channel.SiteCorrelation), math.Sqrt(1-cfg.Channel.SiteCorrelation)
	site := func(us *user, s int) float64 { return rp.shadowSD * (a*us.shadowA + b*us.shadowB[s]) }
	type acc struct{ sx, sy, sxx, syy, sxy, n float64 }
	add := func(c *acc, x, y float64) {
		c.sx, c.sy, c.sxx, c.syy, c.sxy, c.n = c.sx+x, c.sy+y, c.sxx+x*x, c.syy+y*y, c.sxy+x*y, c.n+1
	}
	corr := func(c acc) float64 {
		mx, my := c.sx/c.n, c.sy/c.n
		return (c.sxy/c.n - mx*my) / math.Sqrt((c.sxx/c.n-mx*mx)*(c.syy/c.n-my*my))
	}
	var lagDc, lagFifth, sites acc
	var sum2, n float64
	start := make([]float64, rp.U)
	step := int64(cfg.Channel.ShadowingSlots)
	for i := 0; i < windows*perDc; i++ {
		for u := range rp.users {
			us := &rp.users[u]
			x := site(us, 0)
			switch i % perDc {
			case 0:
				if i > 0 {
					add(&lagDc, start[u], x)
				}
				start[u] = x
				add(&sites, x, site(us, 1))
				sum2, n = sum2+x*x, n+1
			case perDc / 5:
				add(&lagFifth, start[u], x)
			}
		}
		rp.gainsInto(rp.slowNext, int64(i+1)*step)
	}
	for _, c := range []struct {
		name      string
		got, want float64
	}{
		{"correlation after d_c", corr(lagDc), math.Exp(-1)},
		{"correlation after d_c/5", corr(lagFifth), math.Exp(-0.2)},
		{"correlation between sites", corr(sites), 0.5},
		{"standard deviation / σ", math.Sqrt(sum2/n) / 8, 1},
	} {
		if math.Abs(c.got-c.want) > 0.05 {
			t.Errorf("%s = %.4f, want %.4f ± 0.05", c.name, c.got, c.want)
		} else {
			t.Logf("%s = %.4f (want %.4f)", c.name, c.got, c.want)
		}
	}
}
