package fading

import (
	"context"
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/stat/distuv"
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

// meanSE returns the mean of x and its standard error sd/√n.
func meanSE(x []float64) (mean, se float64) {
	n := float64(len(x))
	for _, v := range x {
		mean += v
	}
	mean /= n
	ss := 0.0
	for _, v := range x {
		ss += (v - mean) * (v - mean)
	}
	if len(x) > 1 {
		se = math.Sqrt(ss / (n - 1) / n)
	}
	return mean, se
}

// ratioSE returns Σa/Σb and its standard error by the delta method over the
// per-link pairs (a_i, b_i).
func ratioSE(a, b []float64) (ratio, se float64) {
	var sa, sb float64
	for i := range a {
		sa += a[i]
		sb += b[i]
	}
	if sb == 0 {
		return math.NaN(), math.NaN()
	}
	ratio = sa / sb
	n := float64(len(a))
	mb := sb / n
	ss := 0.0
	for i := range a {
		d := a[i] - ratio*b[i]
		ss += d * d
	}
	if n > 1 {
		se = math.Sqrt(ss/(n-1)/n) / mb
	}
	return ratio, se
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

// lcrTheory returns N_R/f_D and f_D·AFD for threshold rho (linear, rms 1).
func lcrTheory(rho float64) (lcr, afd float64) {
	s := math.Sqrt(2 * math.Pi)
	return s * rho * math.Exp(-rho*rho), (math.Exp(rho*rho) - 1) / (rho * s)
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

func (r *checkRun) dynamic(fdT float64) error {
	links := r.cfg.Links
	c := r.base()
	var shallow, deep []float64
	for _, th := range checkThresholds {
		_, afd := lcrTheory(math.Pow(10, th/20))
		if afd/fdT >= checkSamplesPerFade {
			shallow = append(shallow, th)
		} else {
			deep = append(deep, th)
		}
	}
	// Autocorrelation lags in samples (distinct, at most a quarter record).
	var lagD []int
	for _, ft := range checkLags {
		d := max(1, int(math.Round(ft/fdT)))
		if !slices.Contains(lagD, d) {
			lagD = append(lagD, d)
		}
	}
	so := max(1, int(math.Round(0.02/fdT))) // origin stride: 50 per Doppler period
	sk := max(1, int(math.Round(1/fdT)))    // KS stride: one Doppler period

	meanPow := make([]float64, links)
	originPow := make([]float64, links)
	acf := make([][]float64, len(lagD))    // per link: mean of Re h(t+τ)h*(t)
	acfPow := make([][]float64, len(lagD)) // per link: mean of |h(t)|² over the same origins
	for j := range acf {
		acf[j] = make([]float64, links)
		acfPow[j] = make([]float64, links)
	}
	down := make([][]float64, len(shallow))
	below := make([][]float64, len(shallow))
	for j := range down {
		down[j] = make([]float64, links)
		below[j] = make([]float64, links)
	}
	dbMean, dbSq := make([]float64, links), make([]float64, links)
	out10 := make([]float64, links)
	var ks []float64
	nRec := 0
	for u := 0; u < links; u++ {
		if err := r.ctx.Err(); err != nil {
			return err
		}
		n, err := r.single(c, fdT, u, 0)
		if err != nil {
			return err
		}
		nRec = n
		pw, re, im := r.pw[:n], r.re[0][:n], r.im[0][:n]
		s := 0.0
		for _, v := range pw {
			s += v
		}
		meanPow[u] = s / float64(n)
		w0 := min(n, so)
		s = 0
		for _, v := range pw[:w0] {
			s += v
		}
		originPow[u] = s / float64(w0)
		for j, d := range lagD {
			if d >= n/4 {
				acf[j][u] = math.NaN()
				continue
			}
			s, p, cnt := 0.0, 0.0, 0
			for i := 0; i+d < n; i += so {
				s += re[i]*re[i+d] + im[i]*im[i+d]
				p += pw[i]
				cnt++
			}
			acf[j][u] = s / float64(cnt)
			acfPow[j][u] = p / float64(cnt)
		}
		for j, th := range shallow {
			dn, bl := crossings(pw, math.Pow(10, th/10))
			down[j][u], below[j][u] = dn, bl
		}
		s, sq, cnt := 0.0, 0.0, 0
		thr10 := 0.1 // 10 dB below the unit mean
		o := 0
		for i := 0; i < n; i += so {
			x := 10 * math.Log10(pw[i])
			s += x
			sq += x * x
			cnt++
			if pw[i] < thr10 {
				o++
			}
		}
		dbMean[u], dbSq[u] = s/float64(cnt), sq/float64(cnt)
		out10[u] = float64(o) / float64(cnt)
		for i := 0; i < n; i += sk {
			ks = append(ks, pw[i])
		}
	}
	m, se := meanSE(meanPow)
	r.add(CheckLine{Name: "mean power of a unit-power tap", Kind: "mean-power", Measured: m, Theory: 1, FdT: fdT}, se, allowPower)
	m, se = meanSE(originPow)
	r.add(CheckLine{Name: fmt.Sprintf("ensemble power over the first %d samples (stationarity)", so), Kind: "origin-power", Measured: m, Theory: 1, FdT: fdT}, se, allowPower)
	for j, d := range lagD {
		if math.IsNaN(acf[j][0]) {
			continue
		}
		ft := float64(d) * fdT
		m, se := ratioSE(acf[j], acfPow[j])
		r.add(CheckLine{Name: fmt.Sprintf("autocorrelation at f_D·τ = %.4f vs J0(2π f_D τ)", ft), Kind: "autocorrelation",
			Arg: ft, Measured: m, Theory: math.J0(2 * math.Pi * ft), FdT: fdT}, se, allowAutocorr)
	}
	r.addCrossings(shallow, down, below, nRec, fdT)
	if len(deep) > 0 {
		if err := r.deep(deep); err != nil {
			return err
		}
	}
	// Kolmogorov–Smirnov distance from Exponential(1).
	slices.Sort(ks)
	exp := distuv.Exponential{Rate: 1}
	dmax := 0.0
	nk := float64(len(ks))
	for i, v := range ks {
		f := exp.CDF(v)
		dmax = math.Max(dmax, math.Max(float64(i+1)/nk-f, f-float64(i)/nk))
	}
	infl := 0.0 // Σ_k J0²(2π k sk fdT): correlation of power samples sk apart
	for k := 1; k <= int(r.cfg.DopplerPeriods); k++ {
		j := math.J0(2 * math.Pi * float64(k*sk) * fdT)
		infl += j * j
	}
	r.add(CheckLine{Name: fmt.Sprintf("Kolmogorov–Smirnov distance of the power from Exponential(1), %d samples", len(ks)),
		Kind: "power-ks", Measured: dmax, Theory: 0, FdT: fdT}, 0, ksC/math.Sqrt(nk)*math.Sqrt(1+2*infl))
	r.addDB(1, dbMean, dbSq, fdT)
	m, se = meanSE(out10)
	r.add(CheckLine{Name: "outage 10 dB below the mean, L = 1", Kind: "mrc-outage", Arg: 10, Branches: 1,
		Measured: m, Theory: gammaCDF(1, 0.1), FdT: fdT}, se, allowOutRel*gammaCDF(1, 0.1))
	for _, L := range []int{2, 4} {
		if err := r.mrc(L, fdT); err != nil {
			return err
		}
	}
	if r.cfg.Channel.LOS {
		if err := r.rician(fdT); err != nil {
			return err
		}
	}
	if len(r.cfg.Channel.Profile.Taps) > 1 {
		if err := r.profile(fdT); err != nil {
			return err
		}
	}
	return nil
}

// crossings returns the number of down-crossings of level th by pw and the
// number of samples below it.
func crossings(pw []float64, th float64) (down, below float64) {
	nd, nb := 0, 0
	prevAbove := pw[0] >= th
	for _, v := range pw {
		above := v >= th
		if !above {
			nb++
			if prevAbove {
				nd++
			}
		}
		prevAbove = above
	}
	return float64(nd), float64(nb)
}

func (r *checkRun) addCrossings(ths []float64, down, below [][]float64, n int, fdT float64) {
	for j, th := range ths {
		lcr, afd := lcrTheory(math.Pow(10, th/20))
		// per-link LCR N_R/f_D = down-crossings / (n f_D T)
		rates := make([]float64, len(down[j]))
		for u, d := range down[j] {
			rates[u] = d / (float64(n) * fdT)
		}
		m, se := meanSE(rates)
		r.add(CheckLine{Name: fmt.Sprintf("level-crossing rate N_R/f_D at ρ = %g dB", th), Kind: "lcr", Arg: th,
			Measured: m, Theory: lcr, FdT: fdT}, se, allowLCRRel*lcr)
		// f_D·AFD = Σ below·f_D·T / Σ down-crossings
		bt := make([]float64, len(below[j]))
		for u, b := range below[j] {
			bt[u] = b * fdT
		}
		m, se = ratioSE(bt, down[j])
		r.add(CheckLine{Name: fmt.Sprintf("average fade duration f_D·AFD at ρ = %g dB", th), Kind: "afd", Arg: th,
			Measured: m, Theory: afd, FdT: fdT}, se, allowLCRRel*afd)
	}
}

// deep measures the crossing statistics of thresholds whose fades are too
// short at the configured rate, on records at f_D·T = checkDeepFdT.
func (r *checkRun) deep(ths []float64) error {
	c := r.base()
	c.SampleRateHz = c.DopplerHz / checkDeepFdT
	links := r.cfg.Links
	down := make([][]float64, len(ths))
	below := make([][]float64, len(ths))
	for j := range ths {
		down[j] = make([]float64, links)
		below[j] = make([]float64, links)
	}
	n := 0
	for u := 0; u < links; u++ {
		if err := r.ctx.Err(); err != nil {
			return err
		}
		var err error
		n, err = r.single(c, checkDeepFdT, u, 0x9e37)
		if err != nil {
			return err
		}
		for j, th := range ths {
			down[j][u], below[j][u] = crossings(r.pw[:n], math.Pow(10, th/10))
		}
	}
	r.addCrossings(ths, down, below, n, checkDeepFdT)
	return nil
}

// gammaCDF is the Gamma(L, 1) CDF (gonum distuv).
func gammaCDF(L int, x float64) float64 {
	return distuv.Gamma{Alpha: float64(L), Beta: 1}.CDF(x)
}

// powerDBTheory returns the mean and standard deviation in dB of
// 10 log10(G/L) for G ~ Gamma(L, 1): (10/ln 10)(ψ(L) − ln L) and
// (10/ln 10)√ψ'(L), with ψ(L) = −γ + Σ_{k<L} 1/k and ψ'(L) = π²/6 − Σ_{k<L} 1/k².
func powerDBTheory(L int) (mean, std float64) {
	psi, tri := -0.57721566490153286, math.Pi*math.Pi/6
	for k := 1; k < L; k++ {
		psi += 1 / float64(k)
		tri -= 1 / float64(k*k)
	}
	c := 10 / math.Ln10
	return c * (psi - math.Log(float64(L))), c * math.Sqrt(tri)
}

func (r *checkRun) addDB(L int, dbMean, dbSq []float64, fdT float64) {
	tm, ts := powerDBTheory(L)
	m, se := meanSE(dbMean)
	r.add(CheckLine{Name: fmt.Sprintf("mean of the power in dB, L = %d", L), Kind: "power-db-mean", Branches: L,
		Measured: m, Theory: tm, Unit: "dB", FdT: fdT}, se, allowDB)
	// per-link standard deviations
	sd := make([]float64, len(dbMean))
	var pm, psq float64
	for u := range dbMean {
		sd[u] = math.Sqrt(math.Max(0, dbSq[u]-dbMean[u]*dbMean[u]))
		pm += dbMean[u]
		psq += dbSq[u]
	}
	n := float64(len(dbMean))
	pooled := math.Sqrt(math.Max(0, psq/n-(pm/n)*(pm/n)))
	_, se = meanSE(sd)
	r.add(CheckLine{Name: fmt.Sprintf("standard deviation of the power in dB, L = %d", L), Kind: "power-db-std", Branches: L,
		Measured: pooled, Theory: ts, Unit: "dB", FdT: fdT}, se, allowDB)
}

// mrcMargins are the margins x (dB of per-branch mean power above the
// threshold) of the MRC outage lines, chosen so that the probabilities can
// be measured in a few seconds.
var mrcMargins = map[int][]float64{2: {10, 3}, 4: {3, 0}}

func (r *checkRun) mrc(L int, fdT float64) error {
	c := r.base()
	c.Profile = Profile{Name: fmt.Sprintf("%d equal taps", L)}
	for l := 0; l < L; l++ {
		c.Profile.Taps = append(c.Profile.Taps, Tap{DelayNs: float64(l), PowerDB: 0})
	}
	links := r.cfg.Links
	n := r.recordLen(fdT)
	r.ensure(n)
	g := r.pw[:n]
	margins := mrcMargins[L]
	out := make([][]float64, len(margins))
	for j := range out {
		out[j] = make([]float64, links)
	}
	dbMean, dbSq := make([]float64, links), make([]float64, links)
	so := max(1, int(math.Round(0.02/fdT)))
	for u := 0; u < links; u++ {
		if err := r.ctx.Err(); err != nil {
			return err
		}
		ch, err := r.mk(c, r.cfg.Seed+uint64(L)<<32, u)
		if err != nil {
			return err
		}
		ch.FillGains(g)
		for j, x := range margins {
			th := math.Pow(10, -x/10) / float64(L) // per-branch mean is 1/L
			cnt := 0
			for _, v := range g {
				if v < th {
					cnt++
				}
			}
			out[j][u] = float64(cnt) / float64(n)
		}
		s, sq, cnt := 0.0, 0.0, 0
		for i := 0; i < n; i += so {
			x := 10 * math.Log10(g[i])
			s += x
			sq += x * x
			cnt++
		}
		dbMean[u], dbSq[u] = s/float64(cnt), sq/float64(cnt)
	}
	for j, x := range margins {
		th := gammaCDF(L, math.Pow(10, -x/10))
		m, se := meanSE(out[j])
		r.add(CheckLine{Name: fmt.Sprintf("MRC outage, L = %d, per-branch mean %g dB above the threshold, vs Gamma(L,1) CDF", L, x),
			Kind: "mrc-outage", Arg: x, Branches: L, Measured: m, Theory: th, FdT: fdT}, se, allowOutRel*th)
	}
	r.addDB(L, dbMean, dbSq, fdT)
	return nil
}

// rician checks the first tap with its LOS component: mean power and the K
// factor recovered from the moments of the power pooled over all links,
// K = √(Ga² − Gv)/(Ga − √(Ga² − Gv)) with Ga = E|h|², Gv = Var|h|²
// (pooling avoids the bias of per-link estimates from short records); its
// standard error is the delete-one-link jackknife.
func (r *checkRun) rician(fdT float64) error {
	c := r.base()
	c.LOS = true
	c.RicianKDB, c.LOSAngleRad = r.cfg.Channel.RicianKDB, r.cfg.Channel.LOSAngleRad
	links := r.cfg.Links
	pows := make([]float64, links)
	s1, s2 := make([]float64, links), make([]float64, links)
	var t1, t2, tn float64
	nn := 0
	for u := 0; u < links; u++ {
		if err := r.ctx.Err(); err != nil {
			return err
		}
		n, err := r.single(c, fdT, u, 0x51ce)
		if err != nil {
			return err
		}
		nn = n
		var s, sq float64
		for _, v := range r.pw[:n] {
			s += v
			sq += v * v
		}
		s1[u], s2[u] = s, sq
		t1, t2, tn = t1+s, t2+sq, tn+float64(n)
		pows[u] = s / float64(n)
	}
	m, se := meanSE(pows)
	r.add(CheckLine{Name: "mean power of the Rician tap", Kind: "mean-power", Measured: m, Theory: 1, FdT: fdT}, se, allowPower)
	kOf := func(a, b, n float64) float64 {
		ga := a / n
		return ricianKFromMoments(ga, b/n-ga*ga)
	}
	kAll := kOf(t1, t2, tn)
	jk := make([]float64, links)
	mean := 0.0
	for u := range jk {
		jk[u] = kOf(t1-s1[u], t2-s2[u], tn-float64(nn))
		mean += jk[u] / float64(links)
	}
	ss := 0.0
	for _, v := range jk {
		ss += (v - mean) * (v - mean)
	}
	seK := math.Sqrt(float64(links-1) / float64(links) * ss)
	k := math.Pow(10, r.cfg.Channel.RicianKDB/10)
	r.add(CheckLine{Name: fmt.Sprintf("Rician K (linear) from the moments of the power, K = %g dB", r.cfg.Channel.RicianKDB),
		Kind: "rician-k", Arg: r.cfg.Channel.RicianKDB, Measured: kAll, Theory: k, FdT: fdT}, seK, 0.02*k+0.02)
	return nil
}

// ricianKFromMoments is the moment-based K estimate from the mean ga and
// variance gv of the power |h|².
func ricianKFromMoments(ga, gv float64) float64 {
	d := ga*ga - gv
	if d <= 0 {
		return 0
	}
	sd := math.Sqrt(d)
	return sd / (ga - sd)
}

func (r *checkRun) profile(fdT float64) error {
	c := r.cfg.Channel
	links := r.cfg.Links
	n := r.recordLen(fdT)
	r.ensure(n)
	g := r.pw[:n]
	means := make([]float64, links)
	for u := 0; u < links; u++ {
		if err := r.ctx.Err(); err != nil {
			return err
		}
		ch, err := r.mk(c, r.cfg.Seed+0x7a11, u)
		if err != nil {
			return err
		}
		ch.FillGains(g)
		s := 0.0
		for _, v := range g {
			s += v
		}
		means[u] = s / float64(n)
	}
	m, se := meanSE(means)
	name := c.Profile.Name
	if name == "" {
		name = "custom"
	}
	r.add(CheckLine{Name: fmt.Sprintf("mean combined gain Σ|h_l|² of profile %s (%d taps)", name, len(c.Profile.Taps)),
		Kind: "profile-gain", Branches: len(c.Profile.Taps), Measured: m, Theory: 1, FdT: fdT}, se, allowPower)
	return nil
}
