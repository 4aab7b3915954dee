package fading

import "math"

// SpeedOfLightMps is the speed of light in vacuum, c, in m/s.
const SpeedOfLightMps = 299792458.0

// DopplerHz returns the maximum Doppler frequency f_D = v·f_c/c in Hz of a
// mobile moving at speedKmh km/h on carrier carrierHz Hz (c =
// SpeedOfLightMps). Example: 120 km/h at 2 GHz gives 222.4 Hz. The result is
// NaN or negative when the inputs are; validate it with CheckDoppler.
func DopplerHz(speedKmh, carrierHz float64) float64 {
	return speedKmh / 3.6 * carrierHz / SpeedOfLightMps
}

// SpeedKmh is the inverse of DopplerHz: the speed in km/h at which a mobile
// on carrier carrierHz Hz sees the maximum Doppler dopplerHz Hz,
// v = f_D·c/f_c.
func SpeedKmh(dopplerHz, carrierHz float64) float64 {
	return dopplerHz * SpeedOfLightMps / carrierHz * 3.6
}

// CheckDoppler returns a *ParamError unless the sample rate is finite and
// positive and the maximum Doppler is finite with 0 <= f_D < fs/2 (the
// sampled process must be below half the sample rate, the Nyquist limit).
// Parameters are named "SampleRateHz" and "DopplerHz".
func CheckDoppler(dopplerHz, sampleRateHz float64) error {
	if !finite(sampleRateHz) || sampleRateHz <= 0 {
		return paramErr("SampleRateHz", "must be finite and > 0 Hz, got %g", sampleRateHz)
	}
	if !finite(dopplerHz) || dopplerHz < 0 {
		return paramErr("DopplerHz", "must be finite and >= 0 Hz, got %g", dopplerHz)
	}
	if dopplerHz >= sampleRateHz/2 {
		return paramErr("DopplerHz", "must be below half the sample rate (%g Hz), got %g", sampleRateHz/2, dopplerHz)
	}
	return nil
}

// ClarkeSpectrum returns the Clarke (Jakes) Doppler power spectral density
// of a unit-power complex tap with isotropic scattering and maximum Doppler
// dopplerHz: S(f) = 1/(π f_D √(1 − (f/f_D)²)) for |f| < f_D and 0 elsewhere
// (1/Hz; it integrates to 1 and is infinite at |f| = f_D, where it returns
// +Inf). For f_D <= 0 it returns 0. Reference: Clarke, Bell Syst. Tech. J.
// 47, 1968; Jakes, Microwave Mobile Communications, 1974.
func ClarkeSpectrum(f, dopplerHz float64) float64 {
	if !(dopplerHz > 0) {
		return 0
	}
	x := f / dopplerHz
	if math.Abs(x) > 1 {
		return 0
	}
	if math.Abs(x) == 1 {
		return math.Inf(1)
	}
	return 1 / (math.Pi * dopplerHz * math.Sqrt(1-x*x))
}

// clarkeCDF is the integral of ClarkeSpectrum from −∞ to f:
// ½ + arcsin(f/f_D)/π inside the band, 0 below, 1 above.
func clarkeCDF(f, dopplerHz float64) float64 {
	x := f / dopplerHz
	switch {
	case x <= -1:
		return 0
	case x >= 1:
		return 1
	}
	return 0.5 + math.Asin(x)/math.Pi
}

// ClarkeAutocorrelation returns the normalised autocorrelation of a complex
// tap with the Clarke spectrum, R(τ) = J0(2π f_D τ) (τ in s, f_D in Hz); its
// first zero is at f_D τ = 0.3827. Reference: Clarke 1968; Jakes 1974.
func ClarkeAutocorrelation(tauS, dopplerHz float64) float64 {
	return math.J0(2 * math.Pi * dopplerHz * tauS)
}
