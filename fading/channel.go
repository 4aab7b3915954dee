package fading

import (
	"fmt"
	"math"
)

// Generator selects the algorithm that generates the Rayleigh (diffuse)
// part of every tap.
type Generator int

// Generators. All three give complex taps with unit mean power, the Clarke
// Doppler spectrum (autocorrelation J0(2π f_D τ)) and Rayleigh envelopes,
// are wide-sense stationary and stream (chunk by chunk equals one call).
const (
	// GeneratorDefault is the fast default: sets of DefaultSinusoids
	// sinusoids per branch with Zheng & Xiao's stratified arrival angles and
	// Gaussian amplitudes (every sample exactly complex Gaussian), a new
	// independent set every 50 Doppler periods joined by a power-preserving
	// cross-fade; generated at an internal rate of 5 f_D when f_D·T < 0.15
	// and brought to the sample rate by an 8-tap windowed-sinc interpolator.
	GeneratorDefault Generator = iota
	// GeneratorSumOfSinusoids is the statistically correct sum of sinusoids
	// of Zheng & Xiao (IEEE Trans. Commun. 51(6), 2003): random phase and
	// random (stratified) arrival angle per sinusoid, equal gains,
	// SOSSinusoids per branch by default; internal rate and interpolation as
	// for GeneratorDefault.
	GeneratorSumOfSinusoids
	// GeneratorSpectral is Gaussian noise shaped by the Clarke filter through
	// an inverse FFT (Young & Beaulieu, IEEE Trans. Commun. 48(7), 2000),
	// generated in blocks joined by half-overlapping sine-window cross-fades
	// that keep the power constant; internal rate and interpolation as for
	// GeneratorDefault.
	GeneratorSpectral
)

// String returns the generator's name.
func (g Generator) String() string {
	switch g {
	case GeneratorDefault:
		return "default"
	case GeneratorSumOfSinusoids:
		return "sum-of-sinusoids"
	case GeneratorSpectral:
		return "spectral"
	}
	return fmt.Sprintf("Generator(%d)", int(g))
}

// Sinusoid counts.
const (
	DefaultSinusoids = 16  // sinusoids per branch of GeneratorDefault when ChannelConfig.Sinusoids is 0
	SOSSinusoids     = 32  // sinusoids per branch of GeneratorSumOfSinusoids when ChannelConfig.Sinusoids is 0
	MaxSinusoids     = 256 // largest accepted ChannelConfig.Sinusoids
	MaxRicianKDB     = 60  // largest accepted ChannelConfig.RicianKDB
	MinRicianKDB     = -60 // smallest accepted ChannelConfig.RicianKDB
)

// ChannelConfig configures the fading channel of one link: a tap-delay
// profile whose taps are independent Rayleigh processes (the first one
// Rician when LOS is set), each with the Clarke Doppler spectrum of maximum
// Doppler DopplerHz, sampled at SampleRateHz, with tap powers normalised to
// unit total mean power.
type ChannelConfig struct {
	DopplerHz    float64   // maximum Doppler f_D in Hz, 0 <= f_D < SampleRateHz/2 (0: static channel, one draw)
	SampleRateHz float64   // sample rate fs in Hz, > 0 (for the loop: the update rate)
	Profile      Profile   // tap-delay profile (validated); Name is informational
	RicianKDB    float64   // K factor of the first tap in dB, in [MinRicianKDB, MaxRicianKDB]; used only when LOS is true
	LOS          bool      // first tap Rician with a line-of-sight component
	LOSAngleRad  float64   // arrival angle θ of the LOS component: its phasor rotates at f_D cos θ; finite
	Generator    Generator // algorithm; GeneratorDefault is fast and statistically correct
	Sinusoids    int       // sinusoids per branch for the sum-of-sinusoids generators, 0 or [1, MaxSinusoids]; 0 -> generator default
}

// Validate returns a *ParamError naming the first bad field (Go field
// paths, e.g. "DopplerHz", "Profile.Taps[1].DelayNs").
func (c ChannelConfig) Validate() error {
	if err := CheckDoppler(c.DopplerHz, c.SampleRateHz); err != nil {
		return err
	}
	if err := c.Profile.Validate(); err != nil {
		return withPrefix("Profile", err)
	}
	if c.LOS {
		if err := checkRange("RicianKDB", c.RicianKDB, MinRicianKDB, MaxRicianKDB, "dB"); err != nil {
			return err
		}
		if !finite(c.LOSAngleRad) {
			return paramErr("LOSAngleRad", "must be finite, got %g", c.LOSAngleRad)
		}
	}
	if c.Generator < GeneratorDefault || c.Generator > GeneratorSpectral {
		return paramErr("Generator", "must be default (0), sum-of-sinusoids (1) or spectral (2), got %d", int(c.Generator))
	}
	if c.Sinusoids < 0 || c.Sinusoids > MaxSinusoids {
		return paramErr("Sinusoids", "must be 0 (generator default) or in [1, %d], got %d", MaxSinusoids, c.Sinusoids)
	}
	return nil
}

// Internal-rate rules (see internalStep).
const (
	internalNu  = 0.2  // f_D / internal rate when a generator decimates
	directAbove = 0.15 // generators run at the sample rate when f_D·T >= this
	interpHist  = interpTaps - 1
)

// internalStep returns the internal-rate step (internal samples per output
// sample, <= 1) for a generator at normalised Doppler fdT.
func internalStep(g Generator, fdT float64) float64 {
	switch {
	case fdT == 0:
		return 1
	case fdT < directAbove:
		return fdT / internalNu
	}
	return 1
}

// source generates the internal-rate samples of all taps of a channel.
type source interface {
	// blockLen is the number of internal samples next writes per tap.
	blockLen() int
	// next writes the next blockLen() internal samples of tap l, multiplied
	// by scale[l], into re[l][:blockLen()] and im[l][:blockLen()].
	next(scale []float64, re, im [][]float64)
	// skip advances past the next n >= 1 blocks exactly as n calls of next
	// would, without writing them: the following next writes, bit for bit,
	// the block the (n+1)-th call would have written. It allocates nothing.
	skip(n int)
}

// Channel is the fading channel of one link (see ChannelConfig). It is a
// stream: successive Fill calls continue the same process, and the samples
// do not depend on how the stream is cut into calls. A Channel is not safe
// for concurrent use; use one per goroutine.
type Channel struct {
	cfg   ChannelConfig
	nt    int
	step  float64 // internal samples per output sample; 1 = direct
	src   source
	scale []float64 // per-tap amplitude of the diffuse part

	losAmp, losDelta, losPhase float64 // LOS amplitude, rad per internal sample, initial phase

	blk          int
	hist         int
	bufRe, bufIm [][]float64 // per tap, hist+blk internal samples
	flatRe       []float64   // bufRe's rows end to end
	flatIm       []float64   // bufIm's rows end to end
	blockStart   int64       // internal index held at buf[l][hist]
	pos          int         // direct mode: next unread offset in the block

	m            int64       // next output sample index
	outRe, outIm [][]float64 // interpolation mode: per-tap output chunk (FillTaps only; made on its first use)
	viewRe       [][]float64 // per-tap views of the last produced chunk
	viewIm       [][]float64
	idx          []int32 // interpolation plan: first node per output sample
	wrow         []int32 // interpolation plan: offset of the weight row in interpTable
}

const outChunk = 256 // output samples per interpolation chunk

// NewChannel validates cfg and returns the channel of link user in a run
// seeded with seed; tap l draws from NewStream(seed, user, l, StreamTap) and
// the LOS phase from NewStream(seed, user, 0, StreamLOS). Errors are
// *ParamError values naming the bad field.
func NewChannel(cfg ChannelConfig, seed uint64, user int) (*Channel, error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	nt := len(cfg.Profile.Taps)
	c := &Channel{cfg: cfg, nt: nt}
	c.cfg.Profile.Taps = append([]Tap(nil), cfg.Profile.Taps...)
	pw := cfg.Profile.NormalisedPowers()
	c.scale = make([]float64, nt)
	for l := range c.scale {
		c.scale[l] = math.Sqrt(pw[l])
	}
	fdT := cfg.DopplerHz / cfg.SampleRateHz
	c.step = internalStep(cfg.Generator, fdT)
	nu := fdT / c.step // f_D over the internal rate
	if cfg.LOS {
		k := math.Pow(10, cfg.RicianKDB/10)
		c.losAmp = c.scale[0] * math.Sqrt(k/(k+1))
		c.scale[0] *= math.Sqrt(1 / (k + 1))
		c.losDelta = 2 * math.Pi * nu * math.Cos(cfg.LOSAngleRad)
		c.losPhase = 2 * math.Pi * NewStream(seed, user, 0, StreamLOS).Float64()
	}
	switch {
	case fdT == 0:
		c.src = newStaticSource(nt, seed, user)
	case cfg.Generator == GeneratorSpectral:
		c.src = newSpectralSource(nt, nu, seed, user)
	case cfg.Generator == GeneratorSumOfSinusoids:
		m := cfg.Sinusoids
		if m == 0 {
			m = SOSSinusoids
		}
		c.src = newSOSSource(nt, m, nu, seed, user)
	default:
		m := cfg.Sinusoids
		if m == 0 {
			m = DefaultSinusoids
		}
		c.src = newGSOSSource(nt, m, nu, seed, user)
	}
	c.blk = c.src.blockLen()
	if c.step < 1 {
		c.hist = interpHist // c.idx and c.wrow are made on their first use (ownPlan)
	}
	c.flatRe = make([]float64, nt*(c.hist+c.blk))
	c.flatIm = make([]float64, nt*(c.hist+c.blk))
	c.bufRe = rows(c.flatRe, nt)
	c.bufIm = rows(c.flatIm, nt)
	c.viewRe = make([][]float64, nt)
	c.viewIm = make([][]float64, nt)
	c.blockStart = -int64(c.blk)
	c.pos = c.blk
	return c, nil
}

// rows cuts flat into n rows of equal length (capacity limited to the row).
func rows(flat []float64, n int) [][]float64 {
	m := len(flat) / n
	out := make([][]float64, n)
	for i := range out {
		out[i] = flat[i*m : (i+1)*m : (i+1)*m]
	}
	return out
}

func make2(n, m int) [][]float64 {
	flat := make([]float64, n*m)
	out := make([][]float64, n)
	for i := range out {
		out[i] = flat[i*m : (i+1)*m : (i+1)*m]
	}
	return out
}

// NumTaps returns the number of taps L of the channel's profile.
func (c *Channel) NumTaps() int { return c.nt }

// Config returns the channel's configuration.
func (c *Channel) Config() ChannelConfig { return c.cfg }

// InternalRateHz returns the rate in Hz at which the generator evaluates the
// process before interpolation to the sample rate (equal to SampleRateHz
// when no interpolation is used).
func (c *Channel) InternalRateHz() float64 { return c.cfg.SampleRateHz * c.step }

// refill generates the next internal block, keeping hist samples of history.
func (c *Channel) refill() {
	if c.hist > 0 {
		for l := 0; l < c.nt; l++ {
			copy(c.bufRe[l][:c.hist], c.bufRe[l][c.blk:])
			copy(c.bufIm[l][:c.hist], c.bufIm[l][c.blk:])
		}
	}
	c.blockStart += int64(c.blk)
	for l := 0; l < c.nt; l++ {
		c.viewRe[l] = c.bufRe[l][c.hist:]
		c.viewIm[l] = c.bufIm[l][c.hist:]
	}
	c.src.next(c.scale, c.viewRe, c.viewIm)
	if c.losAmp != 0 {
		addPhasor(c.viewRe[0], c.viewIm[0], c.losAmp, c.losPhase+c.losDelta*float64(c.blockStart), c.losDelta)
	}
}

// addPhasor adds a·exp(j(θ0 + kΔ)) for k = 0..len(re)-1 to (re, im),
// rotating a phasor from an exact start value.
func addPhasor(re, im []float64, a, theta0, delta float64) {
	s, co := math.Sincos(theta0)
	pr, pi := a*co, a*s
	ws, wc := math.Sincos(delta)
	im = im[:len(re)]
	for k := range re {
		re[k] += pr
		im[k] += pi
		pr, pi = pr*wc-pi*ws, pr*ws+pi*wc
	}
}

// produce makes up to max output samples available in c.viewRe[l][:n],
// c.viewIm[l][:n] and returns n >= 1 (for max >= 1).
func (c *Channel) produce(max int) int {
	if c.hist == 0 {
		if c.pos >= c.blk { // pos < 2·blk (Skip)
			c.refill()
			c.pos -= c.blk
		}
		n := min(max, c.blk-c.pos)
		for l := 0; l < c.nt; l++ {
			c.viewRe[l] = c.bufRe[l][c.pos : c.pos+n]
			c.viewIm[l] = c.bufIm[l][c.pos : c.pos+n]
		}
		c.pos += n
		c.m += int64(n)
		return n
	}
	n := c.plan(max)
	if c.outRe == nil {
		// Only FillTaps reads the interpolated taps; FillGains
		// interpolates straight into powers. A channel that only fills
		// gains (most of a multi-cell layout's) never makes these.
		c.outRe, c.outIm = make2(c.nt, outChunk), make2(c.nt, outChunk)
	}
	for l := 0; l < c.nt; l++ {
		interpTap(c.outRe[l][:n], c.outIm[l][:n], c.bufRe[l], c.bufIm[l], c.idx[:n], c.wrow[:n])
		c.viewRe[l] = c.outRe[l][:n]
		c.viewIm[l] = c.outIm[l][:n]
	}
	return n
}

// interpTap interpolates one tap: out[i] = Σ_j w[i][j] x[idx[i]+j].
func interpTap(outRe, outIm, re, im []float64, idx, wrow []int32) {
	wts := interpTable
	outIm = outIm[:len(outRe)]
	idx = idx[:len(outRe)]
	wrow = wrow[:len(outRe)]
	for i := range outRe {
		j := int(idx[i])
		o := int(wrow[i])
		w := wts[o : o+interpTaps : o+interpTaps]
		x := re[j : j+interpTaps : j+interpTaps]
		y := im[j : j+interpTaps : j+interpTaps]
		outRe[i] = ((w[0]*x[0] + w[1]*x[1]) + (w[2]*x[2] + w[3]*x[3])) + ((w[4]*x[4] + w[5]*x[5]) + (w[6]*x[6] + w[7]*x[7]))
		outIm[i] = ((w[0]*y[0] + w[1]*y[1]) + (w[2]*y[2] + w[3]*y[3])) + ((w[4]*y[4] + w[5]*y[5]) + (w[6]*y[6] + w[7]*y[7]))
	}
}

// interpTapPower interpolates one tap and writes (first) or adds its power
// |h|² to dst.
func interpTapPower(dst []float64, first bool, re, im []float64, idx, wrow []int32) {
	wts := interpTable
	wrow = wrow[:len(dst)]
	idx = idx[:len(dst)]
	for i := range dst {
		j := int(idx[i])
		o := int(wrow[i])
		w := wts[o : o+interpTaps : o+interpTaps]
		x := re[j : j+interpTaps : j+interpTaps]
		y := im[j : j+interpTaps : j+interpTaps]
		r := ((w[0]*x[0] + w[1]*x[1]) + (w[2]*x[2] + w[3]*x[3])) + ((w[4]*x[4] + w[5]*x[5]) + (w[6]*x[6] + w[7]*x[7]))
		q := ((w[0]*y[0] + w[1]*y[1]) + (w[2]*y[2] + w[3]*y[3])) + ((w[4]*y[4] + w[5]*y[5]) + (w[6]*y[6] + w[7]*y[7]))
		if first {
			dst[i] = r*r + q*q
		} else {
			dst[i] += r*r + q*q
		}
	}
}

// interpIndexOK reports whether an interpolation plan (idx non-decreasing,
// as plan makes it) stays inside buffers of length bufLen and the weight
// table: the guard of the assembly interpolator, which checks no bounds.
func interpIndexOK(idx, wrow []int32, bufLen int) bool {
	n := len(idx)
	if n == 0 || len(wrow) != n || idx[0] < 0 || int(idx[n-1])+interpTaps > bufLen {
		return false
	}
	lo, hi := wrow[0], wrow[0]
	for _, o := range wrow {
		lo, hi = min(lo, o), max(hi, o)
	}
	return lo >= 0 && int(hi)+interpTaps <= len(interpTable)
}

// interpPower3 interpolates three taps and writes (first) or adds the sum
// of their powers |h_a|² + |h_b|² + |h_c|² to dst, in that order (the same
// sums as three interpTapPower calls, one pass over the weights).
func interpPower3(dst []float64, first bool, reA, imA, reB, imB, reC, imC []float64, idx, wrow []int32) {
	wts := interpTable
	wrow = wrow[:len(dst)]
	idx = idx[:len(dst)]
	for i := range dst {
		j := int(idx[i])
		o := int(wrow[i])
		w := wts[o : o+interpTaps : o+interpTaps]
		w0, w1, w2, w3, w4, w5, w6, w7 := w[0], w[1], w[2], w[3], w[4], w[5], w[6], w[7]
		x := reA[j : j+interpTaps : j+interpTaps]
		y := imA[j : j+interpTaps : j+interpTaps]
		r := ((w0*x[0] + w1*x[1]) + (w2*x[2] + w3*x[3])) + ((w4*x[4] + w5*x[5]) + (w6*x[6] + w7*x[7]))
		q := ((w0*y[0] + w1*y[1]) + (w2*y[2] + w3*y[3])) + ((w4*y[4] + w5*y[5]) + (w6*y[6] + w7*y[7]))
		pa := r*r + q*q
		x = reB[j : j+interpTaps : j+interpTaps]
		y = imB[j : j+interpTaps : j+interpTaps]
		r = ((w0*x[0] + w1*x[1]) + (w2*x[2] + w3*x[3])) + ((w4*x[4] + w5*x[5]) + (w6*x[6] + w7*x[7]))
		q = ((w0*y[0] + w1*y[1]) + (w2*y[2] + w3*y[3])) + ((w4*y[4] + w5*y[5]) + (w6*y[6] + w7*y[7]))
		pb := r*r + q*q
		x = reC[j : j+interpTaps : j+interpTaps]
		y = imC[j : j+interpTaps : j+interpTaps]
		r = ((w0*x[0] + w1*x[1]) + (w2*x[2] + w3*x[3])) + ((w4*x[4] + w5*x[5]) + (w6*x[6] + w7*x[7]))
		q = ((w0*y[0] + w1*y[1]) + (w2*y[2] + w3*y[3])) + ((w4*y[4] + w5*y[5]) + (w6*y[6] + w7*y[7]))
		pc := r*r + q*q
		if first {
			dst[i] = (pa + pb) + pc
		} else {
			dst[i] = ((dst[i] + pa) + pb) + pc
		}
	}
}

// FillGains writes len(dst) consecutive combined power gains
// g = Σ_l |h_l|² (ideal maximal-ratio / RAKE combining, unit mean); successive
// calls continue the same process. It allocates nothing.
func (c *Channel) FillGains(dst []float64) { c.FillGainsShared(dst, nil) }

// FillGainsShared is FillGains taking interpolation plans from pc (nil:
// none) where another channel with the same step already made them; the
// gains are bit for bit those of FillGains.
func (c *Channel) FillGainsShared(dst []float64, pc *PlanCache) {
	if c.hist > 0 {
		for len(dst) > 0 {
			n, idx, wrow, avx := c.planShared(len(dst), pc)
			c.interpPlanned(dst[:n], idx, wrow, avx)
			dst = dst[n:]
		}
		return
	}
	for len(dst) > 0 {
		n := c.produce(len(dst))
		d := dst[:n]
		re, im := c.viewRe[0][:n], c.viewIm[0][:n]
		for i := range d {
			d[i] = re[i]*re[i] + im[i]*im[i]
		}
		for l := 1; l < c.nt; l++ {
			re, im := c.viewRe[l][:n], c.viewIm[l][:n]
			for i := range d {
				d[i] += re[i]*re[i] + im[i]*im[i]
			}
		}
		dst = dst[n:]
	}
}

// interpPlanned writes the power gains of the len(dst) samples planned in
// idx and wrow (avx: the plan passed interpIndexOK, the AVX kernels may
// run).
func (c *Channel) interpPlanned(dst []float64, idx, wrow []int32, avx bool) {
	if avx {
		l := 0
		for stride := c.hist + c.blk; l+3 <= c.nt; l += 3 {
			interpPower3AVX(dst, l == 0, c.flatRe[l*stride:(l+3)*stride], c.flatIm[l*stride:(l+3)*stride], stride, idx, wrow)
		}
		for ; l < c.nt; l++ {
			interpPowerAVX(dst, l == 0, c.bufRe[l], c.bufIm[l], idx, wrow)
		}
		return
	}
	l := 0
	for ; l+3 <= c.nt; l += 3 {
		interpPower3(dst, l == 0, c.bufRe[l], c.bufIm[l], c.bufRe[l+1], c.bufIm[l+1], c.bufRe[l+2], c.bufIm[l+2], idx, wrow)
	}
	for ; l < c.nt; l++ {
		interpTapPower(dst, l == 0, c.bufRe[l], c.bufIm[l], idx, wrow)
	}
}

// FillGainsPair is FillGainsShared(dstA, pc) on a then
// FillGainsShared(dstB, pc) on b, bit for bit, in one pass where it can:
// when both are one-tap channels at the same point of the same plans
// (same internal step, position and block: legs of one speed on one slot
// clock), each output sample's interpolation weights are loaded once for
// both (interpPower2AVX). Otherwise, or for what is left when the plans
// part, it runs FillGainsShared on each.
func FillGainsPair(dstA, dstB []float64, a, b *Channel, pc *PlanCache) {
	if pc != nil && a.nt == 1 && b.nt == 1 && a.hist > 0 && b.hist > 0 && a.blk == b.blk && len(dstA) == len(dstB) {
		for len(dstA) > 0 && a.step == b.step && a.m == b.m && a.blockStart == b.blockStart {
			n, idx, wrow, avx := a.planShared(len(dstA), pc)
			nb, idxB, wrowB, avxB := b.planShared(len(dstB), pc)
			// b, at a's key, takes a's plan from the cache: one entry.
			if nb == n && avx && avxB && &idx[0] == &idxB[0] && &wrow[0] == &wrowB[0] &&
				interpPower2AVX(dstA[:n], dstB[:n], a.bufRe[0], a.bufIm[0], b.bufRe[0], b.bufIm[0], idx, wrow) {
				dstA, dstB = dstA[n:], dstB[n:]
				continue
			}
			// Not one shared plan: each its own (planned above).
			a.interpPlanned(dstA[:n], idx, wrow, avx)
			b.interpPlanned(dstB[:nb], idxB, wrowB, avxB)
			dstA, dstB = dstA[n:], dstB[nb:]
			break
		}
	}
	a.FillGainsShared(dstA, pc)
	b.FillGainsShared(dstB, pc)
}

// FillTaps writes n = len(dst)/NumTaps() consecutive samples of the complex
// tap gains, interleaved as dst[s*L+l] (any remainder of dst is left
// untouched); same process as FillGains (use a channel for one or the
// other). It allocates nothing.
func (c *Channel) FillTaps(dst []complex64) {
	total := len(dst) / c.nt
	for total > 0 {
		n := c.produce(total)
		for l := 0; l < c.nt; l++ {
			re, im := c.viewRe[l][:n], c.viewIm[l][:n]
			for i := range re {
				dst[i*c.nt+l] = complex(float32(re[i]), float32(im[i]))
			}
		}
		dst = dst[n*c.nt:]
		total -= n
	}
}

// fillComplex writes n = len(re[0]) samples of every tap in float64 (used by
// Check); re and im must have NumTaps() rows of equal length.
func (c *Channel) fillComplex(re, im [][]float64) {
	off, total := 0, len(re[0])
	for off < total {
		n := c.produce(total - off)
		for l := 0; l < c.nt; l++ {
			copy(re[l][off:off+n], c.viewRe[l][:n])
			copy(im[l][off:off+n], c.viewIm[l][:n])
		}
		off += n
	}
}
