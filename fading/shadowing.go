package fading

import (
	"math"
	"math/rand/v2"
)

// ShadowingConfig configures log-normal shadowing correlated in distance
// travelled (Gudmundson, Electron. Lett. 27(23), 1991).
type ShadowingConfig struct {
	SigmaDB        float64 // standard deviation of the shadowing in dB, in [0, 30]
	DecorrelationM float64 // decorrelation distance D in m (correlation 1/e at D), > 0
	SpeedMps       float64 // mobile speed in m/s, >= 0 (0: frozen shadowing)
	SamplePeriodS  float64 // time between samples T in s, > 0
}

// Validate returns a *ParamError naming the first bad field.
func (c ShadowingConfig) Validate() error {
	if err := checkRange("SigmaDB", c.SigmaDB, 0, 30, "dB"); err != nil {
		return err
	}
	if !finite(c.DecorrelationM) || c.DecorrelationM <= 0 {
		return paramErr("DecorrelationM", "must be finite and > 0 m, got %g", c.DecorrelationM)
	}
	if !finite(c.SpeedMps) || c.SpeedMps < 0 {
		return paramErr("SpeedMps", "must be finite and >= 0 m/s, got %g", c.SpeedMps)
	}
	if !finite(c.SamplePeriodS) || c.SamplePeriodS <= 0 {
		return paramErr("SamplePeriodS", "must be finite and > 0 s, got %g", c.SamplePeriodS)
	}
	return nil
}

// Coefficient returns the AR(1) coefficient a = ε_D^(vT/D) with ε_D = e^−1,
// i.e. a = exp(−v T / D): the correlation between successive samples.
func (c ShadowingConfig) Coefficient() float64 {
	return math.Exp(-c.SpeedMps * c.SamplePeriodS / c.DecorrelationM)
}

// Shadowing generates log-normal shadowing in dB as a stationary Gaussian
// AR(1) process after Gudmundson (1991): s_{k+1} = a s_k + σ √(1−a²) w_k,
// w_k ~ N(0,1), s_0 ~ N(0, σ²), a = exp(−vT/D), so that the correlation at a
// distance Δx travelled is R(Δx) = σ² e^(−Δx/D).
type Shadowing struct {
	a, b, s float64
	r       *rand.Rand
}

// NewShadowing returns a shadowing process drawing from r (use
// NewStream(seed, user, 0, StreamShadowing)). It returns a *ParamError for
// an invalid configuration or a nil r ("r").
func NewShadowing(cfg ShadowingConfig, r *rand.Rand) (*Shadowing, error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	if r == nil {
		return nil, paramErr("r", "random stream must not be nil")
	}
	a := cfg.Coefficient()
	return &Shadowing{a: a, b: cfg.SigmaDB * math.Sqrt(1-a*a), s: cfg.SigmaDB * r.NormFloat64(), r: r}, nil
}

// FillDB writes len(dst) consecutive shadowing samples in dB; successive
// calls continue the same process. It allocates nothing.
func (s *Shadowing) FillDB(dst []float64) {
	for i := range dst {
		dst[i] = s.s
		s.s = s.a*s.s + s.b*s.r.NormFloat64()
	}
}
