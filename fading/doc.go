// Package fading holds fadeloop's channel models: mobility and Doppler
// (f_D = v·f_c/c), the Clarke (Jakes) Doppler spectrum, Rayleigh and Rician
// fading generators, tap-delay profiles with ideal maximal-ratio (RAKE)
// combining, log-normal shadowing correlated in distance (Gudmundson 1991),
// and path-loss models (free space, log-distance, Hata, COST-231 Hata).
//
// # Generators
//
// Every generator gives complex taps with unit mean power, the Clarke
// spectrum (autocorrelation J0(2π f_D τ)) and Rayleigh envelopes, and
// streams: a Channel advanced chunk by chunk gives the same samples, bit for
// bit, as one long call, because all internal blocks are aligned to absolute
// sample indices.
//
//   - GeneratorSumOfSinusoids: the sum of sinusoids of Zheng & Xiao (IEEE
//     Trans. Commun. 51(6), 2003) with random phase and stratified random
//     arrival angle per sinusoid (SOSSinusoids = 32 per branch by default),
//     evaluated with cosine recursions restarted exactly every 512 internal
//     samples (no drift).
//   - GeneratorSpectral: Clarke-filtered complex Gaussian noise through
//     gonum's inverse FFT (Young & Beaulieu, IEEE Trans. Commun. 48(7),
//     2000), blocks half-overlapped and joined with sine/cosine windows so
//     that the power stays constant across joins.
//   - GeneratorDefault: sets of DefaultSinusoids = 16 sinusoids per branch
//     with Zheng–Xiao angles and Gaussian amplitudes (so every sample is
//     exactly complex Gaussian), a fresh independent set every 50 Doppler
//     periods joined by a power-preserving cross-fade over a quarter of
//     that. It is the fast path of the loop. Its one known imperfection:
//     within a set the power |h|² keeps a residual correlation of about
//     1/(2M) (≈ 0.02–0.03 at M = 16, where the Clarke process has J0²,
//     < 0.01 beyond 5 Doppler periods), i.e. slightly more slow power
//     variation than the ideal process; raise Sinusoids to reduce it.
//
// When f_D·T < 0.15 every generator runs at an internal rate of 5 f_D and
// interpolates to the sample rate with an 8-tap Kaiser-windowed sinc (error
// power about −62 dB); f_D = 0 gives a static channel (one complex Gaussian
// draw per tap). The classic deterministic Jakes
// generator is not wide-sense stationary (Pop & Beaulieu, IEEE Trans.
// Commun. 49(4), 2001) and is not offered.
//
// Check runs the statistical self-check of a configuration (autocorrelation,
// level crossings, fade durations, power distribution, MRC diversity,
// Rician K) and reports measured against theory with a tolerance per line.
//
// Every random draw comes from a stream derived from (seed, user, index,
// process kind) by NewStream; nothing uses a global source, so samples are
// bit-identical for identical inputs whatever GOMAXPROCS is.
//
// Bad input never panics: constructors and validators return a *ParamError
// naming the parameter (Go field path) and the rule.
//
// On amd64 with AVX the interpolator and the sums of oscillators run in
// assembly (interp_amd64.s). It does the Go code's operations in the same
// order, without fused multiply-adds, so the samples are the same bits on
// every machine (TestAssemblyMatchesGo); elsewhere, and with the build tag
// purego (go build -tags purego: no assembly at all), the Go code runs. A
// PlanCache (FillGainsShared) lets channels with the same Doppler share
// their interpolation plans, with the same samples as FillGains.
//
// The package is pure Go: it imports only the standard library and gonum,
// never grpc or generated protobuf code.
package fading
