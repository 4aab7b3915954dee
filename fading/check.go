package fading

import (
	"context"
	"math"
)

// Check defaults and limits.
const (
	DefaultCheckLinks   = 128   // CheckConfig.Links when 0
	DefaultCheckPeriods = 250   // CheckConfig.DopplerPeriods when 0
	DefaultCheckSigmas  = 4     // CheckConfig.Sigmas when 0
	MaxCheckLinks       = 4096  // largest CheckConfig.Links
	MaxCheckPeriods     = 20000 // largest CheckConfig.DopplerPeriods

	// checkDeepFdT is the normalised Doppler at which thresholds whose fades
	// are too short for the configured sample rate are measured (ORACLES:
	// check deep thresholds at f_D·T <= 0.002).
	checkDeepFdT = 0.002
	// checkSamplesPerFade: a threshold is measured at the configured rate
	// only when its theoretical average fade lasts at least this many samples.
	checkSamplesPerFade = 10
	// checkMaxSamples caps the record length per link, checkMaxTotal the
	// samples of one pass over all links (which bounds the run time at very
	// small f_D·T; the record length used is reported per line).
	checkMaxSamples = 1 << 20
	checkMaxTotal   = 1 << 23
	// ksC is the asymptotic Kolmogorov–Smirnov critical constant at
	// significance 1e-3, √(−ln(α/2)/2).
	ksC = 1.949
)

// Systematic allowances added to the statistical tolerance of Check lines:
// effects that do not shrink with the run length. They are small next to
// the errors Check must catch (a Doppler off by 20 % moves R(τ) at
// f_D τ = 0.3827 by 0.08; a power error of ×1.5 moves the mean by 0.5).
const (
	allowPower    = 0.003 // unit: mean power; cubic-interpolation droop (<5e-4) and FFT-bin discretisation
	allowAutocorr = 0.004 // R(τ); interpolation, bin discretisation, cross-fade factor cos(πτ/N)
	allowLCRRel   = 0.03  // relative; sampled crossings missed at >= checkSamplesPerFade samples per fade
	allowOutRel   = 0.05  // relative; outage tail of a finite sum of sinusoids
	allowDB       = 0.05  // dB; power-in-dB mean and std
)

// CheckConfig configures the statistical self-check of a fading generator
// configuration (see Check).
type CheckConfig struct {
	// Channel is the configuration under test: Generator, Sinusoids,
	// DopplerHz and SampleRateHz select the process; LOS, RicianKDB and
	// LOSAngleRad the Rician lines; Profile (empty means one tap) the
	// profile line.
	Channel ChannelConfig
	// Links is the number of independent links (realisations) per
	// statistic, 0 -> DefaultCheckLinks, else in [8, MaxCheckLinks].
	Links int
	// DopplerPeriods is the record length of each link in units of 1/f_D,
	// 0 -> DefaultCheckPeriods, else in [20, MaxCheckPeriods]; records are
	// capped at 2^20 samples per link and 2^23 over all links (the length
	// used is reported in CheckLine.Periods).
	DopplerPeriods float64
	// Seed seeds the links (link u is NewChannel(…, Seed, u)).
	Seed uint64
	// Sigmas is the tolerance in standard errors, 0 -> DefaultCheckSigmas,
	// else in [1, 10].
	Sigmas float64
}

// CheckLine is one statistic of a Check: measured against theory, with the
// tolerance |Measured − Theory| <= Tolerance that decides Pass.
type CheckLine struct {
	Name      string  // human-readable description
	Measured  float64 // estimate from the simulated links
	Theory    float64 // published value for the ideal process
	Tolerance float64 // Sigmas standard errors (from the spread over independent links) plus a stated systematic allowance
	Pass      bool
	Unit      string
	Kind      string  // statistic: see the Check documentation
	Arg       float64 // argument: lag f_D·τ (autocorrelation), threshold ρ in dB (lcr, afd), margin x in dB (mrc-outage), K in dB (rician-k)
	Branches  int     // diversity branches L of the records (1 unless MRC)
	FdT       float64 // normalised Doppler f_D·T of the records the line was measured on
	Periods   float64 // record length per link, in Doppler periods, of those records
}

// CheckReport is the result of Check: Pass is true when every line passes.
type CheckReport struct {
	Lines          []CheckLine
	Pass           bool
	Links          int     // links per statistic used
	DopplerPeriods float64 // record length per link used, 1/f_D units
}

func (c CheckConfig) withDefaults() CheckConfig {
	if c.Links == 0 {
		c.Links = DefaultCheckLinks
	}
	if c.DopplerPeriods == 0 {
		c.DopplerPeriods = DefaultCheckPeriods
	}
	if c.Sigmas == 0 {
		c.Sigmas = DefaultCheckSigmas
	}
	if len(c.Channel.Profile.Taps) == 0 {
		c.Channel.Profile = Profile{Name: "FLAT", Taps: []Tap{{0, 0}}}
	}
	return c
}

// Validate returns a *ParamError naming the first bad field ("Channel.…",
// "Links", "DopplerPeriods", "Sigmas"); zero values take the defaults.
func (c CheckConfig) Validate() error {
	c = c.withDefaults()
	if err := c.Channel.Validate(); err != nil {
		return withPrefix("Channel", err)
	}
	if c.Links < 8 || c.Links > MaxCheckLinks {
		return paramErr("Links", "must be 0 (default %d) or in [8, %d], got %d", DefaultCheckLinks, MaxCheckLinks, c.Links)
	}
	if !finite(c.DopplerPeriods) || c.DopplerPeriods < 20 || c.DopplerPeriods > MaxCheckPeriods {
		return paramErr("DopplerPeriods", "must be 0 (default %d) or in [20, %d], got %g", DefaultCheckPeriods, MaxCheckPeriods, c.DopplerPeriods)
	}
	if !finite(c.Sigmas) || c.Sigmas < 1 || c.Sigmas > 10 {
		return paramErr("Sigmas", "must be 0 (default %d) or in [1, 10], got %g", DefaultCheckSigmas, c.Sigmas)
	}
	return nil
}

// sampler is what Check needs from a channel.
type sampler interface {
	fillComplex(re, im [][]float64)
	FillGains(dst []float64)
}

type samplerFactory func(cfg ChannelConfig, seed uint64, user int) (sampler, error)

func newSampler(cfg ChannelConfig, seed uint64, user int) (sampler, error) {
	return NewChannel(cfg, seed, user)
}

// Check runs the statistical self-check of a generator configuration and
// returns each statistic measured against theory. With f_D > 0 the lines
// are (Kind in brackets):
//
//   - mean power of a unit-power tap [mean-power] and the ensemble power in
//     the first 0.02/f_D of the records [origin-power], which exposes a
//     non-stationary generator;
//   - normalised autocorrelation Σ Re h(t+τ)h*(t) / Σ |h(t)|² (pooled over
//     the links, standard error by the delta method) at
//     f_D τ ≈ 0.05, 0.1, 0.2, 0.3827, 0.6, 1, 1.5 against J0(2π f_D τ)
//     [autocorrelation] (Clarke 1968; Jakes 1974);
//   - level-crossing rate N_R/f_D = √(2π) ρ e^(−ρ²) [lcr] and average fade
//     duration f_D·AFD = (e^(ρ²) − 1)/(ρ√(2π)) [afd] at ρ = 0, −3, −10,
//     −20 dB, ρ relative to the unit rms envelope (Jakes 1974);
//     thresholds whose average fade lasts fewer than 10
//     samples at the configured rate are measured on records generated at
//     f_D·T = 0.002 with the same generator;
//   - the Kolmogorov–Smirnov distance of the power from the exponential
//     distribution [power-ks], on samples 1/f_D apart, with the critical
//     value at significance 1e-3 widened for their residual correlation;
//   - the mean and standard deviation of the power in dB for L = 1, 2, 4
//     equal-power branches under maximal-ratio combining [power-db-mean,
//     power-db-std] (digamma/trigamma of the Gamma distribution) and the
//     MRC outage P(Σ|h_l|² < 10^(−x/10)) per unit branch power against the
//     Gamma(L, 1) CDF [mrc-outage] (Proakis);
//   - with LOS: the mean power and the Rician K recovered from the moments of
//     the power [rician-k];
//   - for a profile of several taps: the mean combined gain [profile-gain].
//
// With f_D = 0 the lines are the ensemble mean power [mean-power] and the
// largest change of the gain over the record [static]. Tolerances are
// Sigmas standard errors, the standard errors estimated from the spread of
// the per-link estimates over independent links, plus the small systematic
// allowances stated in the source. Check honours ctx between links and
// returns ctx.Err() when cancelled. The default configuration runs in well
// under a few seconds on one core.
func Check(ctx context.Context, cfg CheckConfig) (*CheckReport, error) {
	return runCheck(ctx, cfg, newSampler)
}

type checkRun struct {
	ctx    context.Context
	cfg    CheckConfig
	mk     samplerFactory
	lines  []CheckLine
	re, im [][]float64
	pw     []float64
}

func (r *checkRun) add(l CheckLine, se, allow float64) {
	l.Tolerance = r.cfg.Sigmas*se + allow
	if l.FdT > 0 {
		l.Periods = float64(r.recordLen(l.FdT)) * l.FdT
	}
	l.Pass = finite(l.Measured) && finite(l.Tolerance) && math.Abs(l.Measured-l.Theory) <= l.Tolerance
	if l.Branches == 0 {
		l.Branches = 1
	}
	r.lines = append(r.lines, l)
}

func runCheck(ctx context.Context, cfg CheckConfig, mk samplerFactory) (*CheckReport, error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	cfg = cfg.withDefaults()
	r := &checkRun{ctx: ctx, cfg: cfg, mk: mk}
	fdT := cfg.Channel.DopplerHz / cfg.Channel.SampleRateHz
	var err error
	if fdT == 0 {
		err = r.static()
	} else {
		err = r.dynamic(fdT)
	}
	if err != nil {
		return nil, err
	}
	rep := &CheckReport{Lines: r.lines, Pass: true, Links: cfg.Links, DopplerPeriods: cfg.DopplerPeriods}
	for _, l := range r.lines {
		rep.Pass = rep.Pass && l.Pass
	}
	return rep, nil
}

// base returns the configuration of the Rayleigh records: one tap, no LOS.
func (r *checkRun) base() ChannelConfig {
	c := r.cfg.Channel
	c.Profile = Profile{Name: "FLAT", Taps: []Tap{{0, 0}}}
	c.LOS = false
	return c
}

// recordLen returns the record length per link in samples at fdT.
func (r *checkRun) recordLen(fdT float64) int {
	n := math.Ceil(r.cfg.DopplerPeriods / fdT)
	return int(math.Min(n, math.Min(checkMaxSamples, float64(checkMaxTotal/r.cfg.Links))))
}

func (r *checkRun) ensure(n int) {
	if len(r.pw) < n {
		r.re, r.im = make2(1, n), make2(1, n)
		r.pw = make([]float64, n)
	}
}

// single generates the single-tap record of link u into r.pw (power) and
// r.re, r.im; it returns the record length.
func (r *checkRun) single(c ChannelConfig, fdT float64, u int, seedOff uint64) (int, error) {
	n := r.recordLen(fdT)
	r.ensure(n)
	ch, err := r.mk(c, r.cfg.Seed+seedOff, u)
	if err != nil {
		return 0, err
	}
	re, im := [][]float64{r.re[0][:n]}, [][]float64{r.im[0][:n]}
	ch.fillComplex(re, im)
	pw := r.pw[:n]
	for i := range pw {
		pw[i] = re[0][i]*re[0][i] + im[0][i]*im[0][i]
	}
	return n, nil
}

func (r *checkRun) static() error {
	links := r.cfg.Links
	pow := make([]float64, links)
	maxDev := 0.0
	c := r.base()
	g := make([]float64, 1000)
	for u := 0; u < links; u++ {
		if err := r.ctx.Err(); err != nil {
			return err
		}
		ch, err := r.mk(c, r.cfg.Seed, u)
		if err != nil {
			return err
		}
		ch.FillGains(g)
		pow[u] = g[0]
		for _, v := range g {
			maxDev = math.Max(maxDev, math.Abs(v-g[0]))
		}
	}
	m, se := meanSE(pow)
	r.add(CheckLine{Name: "ensemble mean power of a static tap", Kind: "mean-power", Measured: m, Theory: 1}, se, 0)
	r.add(CheckLine{Name: "largest change of a static gain over 1000 samples", Kind: "static", Measured: maxDev, Theory: 0}, 0, 0)
	return nil
}

var (
	checkLags       = []float64{0.05, 0.1, 0.2, 0.3827, 0.6, 1.0, 1.5}
	checkThresholds = []float64{0, -3, -10, -20}
)

// mrcMargins are the margins x (dB of per-branch mean power above the
// threshold) of the MRC outage lines, chosen so that the probabilities can
// be measured in a few seconds.
var mrcMargins = map[int][]float64{2: {10, 3}, 4: {3, 0}}
