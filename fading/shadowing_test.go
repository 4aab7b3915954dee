package fading

import (
	"math"
	"testing"
)

// TestGudmundsonCorrelation: the shadowing correlation at one decorrelation
// distance travelled is σ² e^(−1) and the standard deviation is σ
// (Gudmundson, Electron. Lett. 27(23), 1991). Ensemble over independent
// links; tolerance 4 standard errors over the links.
func TestGudmundsonCorrelation(t *testing.T) {
	// suburban 900 MHz: σ = 7.5 dB, correlation 0.82 at 100 m (Gudmundson 1991)
	// gives D = −100/ln 0.82 m.
	d := -100 / math.Log(0.82)
	cfg := ShadowingConfig{SigmaDB: 7.5, DecorrelationM: d, SpeedMps: 10, SamplePeriodS: 0.01} // 0.1 m per sample
	lag := int(math.Round(d / (cfg.SpeedMps * cfg.SamplePeriodS)))
	lag100 := 1000 // 100 m
	links := 200
	if !testing.Short() {
		links = 1000
	}
	c1, c2, v := make([]float64, links), make([]float64, links), make([]float64, links)
	x := make([]float64, lag+1)
	for u := range links {
		s, err := NewShadowing(cfg, NewStream(4, u, 0, StreamShadowing))
		if err != nil {
			t.Fatal(err)
		}
		s.FillDB(x)
		c1[u] = x[0] * x[lag] / (7.5 * 7.5)
		c2[u] = x[0] * x[lag100] / (7.5 * 7.5)
		v[u] = x[0] * x[0] / (7.5 * 7.5)
	}
	for _, c := range []struct {
		name string
		x    []float64
		want float64
	}{{"correlation at D", c1, math.Exp(-1)}, {"correlation at 100 m", c2, 0.82}, {"variance / σ²", v, 1}} {
		m, se := meanSE(c.x)
		if math.Abs(m-c.want) > 4*se {
			t.Errorf("%s: %.4f ± %.4f, want %.4f", c.name, m, 4*se, c.want)
		}
	}
	if a := cfg.Coefficient(); math.Abs(a-math.Exp(-0.1/d)) > 1e-15 {
		t.Errorf("AR(1) coefficient %g", a)
	}
}

// TestFrozenShadowing: speed 0 gives a constant shadowing value.
func TestFrozenShadowing(t *testing.T) {
	s, err := NewShadowing(ShadowingConfig{SigmaDB: 8, DecorrelationM: 50, SpeedMps: 0, SamplePeriodS: 1e-3}, NewStream(1, 0, 0, StreamShadowing))
	if err != nil {
		t.Fatal(err)
	}
	x := make([]float64, 100)
	s.FillDB(x)
	for _, v := range x {
		if v != x[0] {
			t.Fatal("frozen shadowing changes")
		}
	}
}
