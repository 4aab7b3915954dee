package fading

import (
	"fmt"
	"math"
)

// PathLoss is a distance-dependent propagation loss model. LossDB returns the
// loss in dB (positive = loss) at a distance in metres, or a *ParamError
// (parameter "DistanceM", or a model field) when the distance or the model's
// parameters are outside the model's validity range. Validate checks the
// model's own parameters.
type PathLoss interface {
	LossDB(distanceM float64) (float64, error)
	Validate() error
}

// FreeSpace is the Friis free-space loss L = 20 log10(4π d f_c / c) dB,
// valid in the far field; CarrierHz must be finite and > 0 and the distance
// finite and > 0.
type FreeSpace struct {
	CarrierHz float64 // carrier frequency, Hz, > 0
}

// Validate checks CarrierHz.
func (m FreeSpace) Validate() error {
	if !finite(m.CarrierHz) || m.CarrierHz <= 0 {
		return paramErr("CarrierHz", "must be finite and > 0 Hz, got %g", m.CarrierHz)
	}
	return nil
}

// LossDB returns 20 log10(4π d f_c / c) in dB.
func (m FreeSpace) LossDB(distanceM float64) (float64, error) {
	if err := m.Validate(); err != nil {
		return 0, err
	}
	if !finite(distanceM) || distanceM <= 0 {
		return 0, paramErr("DistanceM", "must be finite and > 0 m, got %g", distanceM)
	}
	return 20 * math.Log10(4*math.Pi*distanceM*m.CarrierHz/SpeedOfLightMps), nil
}

// LogDistance is the log-distance model L = L0 + 10 n log10(d/d0) dB for
// d >= d0, with reference distance d0 in m (> 0), reference loss L0 in dB
// (finite) and path-loss exponent n in (0, 10] (2 is free space, 3–5 is
// typical of urban cells; Rappaport, Wireless Communications).
type LogDistance struct {
	RefDistanceM float64 // d0, m, > 0
	RefLossDB    float64 // L0 = loss at d0, dB, finite
	Exponent     float64 // n, in (0, 10]
}

// Validate checks the three parameters.
func (m LogDistance) Validate() error {
	if !finite(m.RefDistanceM) || m.RefDistanceM <= 0 {
		return paramErr("RefDistanceM", "must be finite and > 0 m, got %g", m.RefDistanceM)
	}
	if !finite(m.RefLossDB) {
		return paramErr("RefLossDB", "must be finite, got %g", m.RefLossDB)
	}
	if !finite(m.Exponent) || m.Exponent <= 0 || m.Exponent > 10 {
		return paramErr("Exponent", "must be in (0, 10], got %g", m.Exponent)
	}
	return nil
}

// LossDB returns L0 + 10 n log10(d/d0); d must be finite and >= d0.
func (m LogDistance) LossDB(distanceM float64) (float64, error) {
	if err := m.Validate(); err != nil {
		return 0, err
	}
	if !finite(distanceM) || distanceM < m.RefDistanceM {
		return 0, paramErr("DistanceM", "must be finite and >= the reference distance %g m, got %g", m.RefDistanceM, distanceM)
	}
	return m.RefLossDB + 10*m.Exponent*math.Log10(distanceM/m.RefDistanceM), nil
}

// HataEnvironment selects the Hata environment correction.
type HataEnvironment int

// Hata environments (Hata, IEEE Trans. Veh. Technol. 29(3), 1980).
const (
	HataUrban      HataEnvironment = iota // urban, small or medium city (the zero value)
	HataUrbanLarge                        // urban, large city (mobile-antenna correction for large cities)
	HataSuburban                          // suburban: urban − 2 (log10(f/28))² − 5.4
	HataOpen                              // open (rural): urban − 4.78 (log10 f)² + 18.33 log10 f − 40.94
)

// String returns the environment's name.
func (e HataEnvironment) String() string {
	switch e {
	case HataUrban:
		return "urban"
	case HataUrbanLarge:
		return "urban-large"
	case HataSuburban:
		return "suburban"
	case HataOpen:
		return "open"
	}
	return fmt.Sprintf("HataEnvironment(%d)", int(e))
}

// Validity ranges of the Hata and COST-231 Hata models.
const (
	hataMinHz, hataMaxHz       = 150e6, 1500e6
	cost231MinHz, cost231MaxHz = 1500e6, 2000e6
	hataMinBaseM, hataMaxBaseM = 30, 200
	hataMinMobM, hataMaxMobM   = 1, 10
	hataMinDistM, hataMaxDistM = 1000, 20000
)

// Hata is the Okumura–Hata median path loss (Hata, IEEE Trans. Veh. Technol.
// 29(3), 1980), with f in MHz, heights in m and d in km:
//
//	L_urban = 69.55 + 26.16 log10 f − 13.82 log10 h_b − a(h_m) + (44.9 − 6.55 log10 h_b) log10 d
//	a(h_m)  = (1.1 log10 f − 0.7) h_m − (1.56 log10 f − 0.8)          small/medium city
//	a(h_m)  = 8.29 (log10 1.54 h_m)² − 1.1   (f < 300 MHz)             large city
//	a(h_m)  = 3.2 (log10 11.75 h_m)² − 4.97  (f >= 300 MHz)            large city
//
// with the suburban and open corrections given at HataEnvironment. Valid
// for f in [150, 1500] MHz, h_b in [30, 200] m, h_m in [1, 10] m and d in
// [1, 20] km; inputs outside are rejected with a *ParamError naming the
// parameter and the range.
type Hata struct {
	CarrierHz     float64 // carrier, Hz, in [150e6, 1500e6]
	BaseHeightM   float64 // base-station antenna height h_b, m, in [30, 200]
	MobileHeightM float64 // mobile antenna height h_m, m, in [1, 10]
	Environment   HataEnvironment
}

func checkHataHeights(hb, hm float64) error {
	if err := checkRange("BaseHeightM", hb, hataMinBaseM, hataMaxBaseM, "m"); err != nil {
		return err
	}
	return checkRange("MobileHeightM", hm, hataMinMobM, hataMaxMobM, "m")
}

func checkHataDistance(d float64) error {
	return checkRange("DistanceM", d, hataMinDistM, hataMaxDistM, "m")
}

// hataMobileCorrection is a(h_m) for a small/medium city.
func hataMobileCorrection(fMHz, hm float64) float64 {
	lf := math.Log10(fMHz)
	return (1.1*lf-0.7)*hm - (1.56*lf - 0.8)
}

// Validate checks the carrier, the heights and the environment.
func (m Hata) Validate() error {
	if err := checkRange("CarrierHz", m.CarrierHz, hataMinHz, hataMaxHz, "Hz"); err != nil {
		return err
	}
	if err := checkHataHeights(m.BaseHeightM, m.MobileHeightM); err != nil {
		return err
	}
	if m.Environment < HataUrban || m.Environment > HataOpen {
		return paramErr("Environment", "must be one of urban, urban-large, suburban, open; got %d", int(m.Environment))
	}
	return nil
}

// LossDB returns the Hata median loss in dB at distanceM (in [1000, 20000] m).
func (m Hata) LossDB(distanceM float64) (float64, error) {
	if err := m.Validate(); err != nil {
		return 0, err
	}
	if err := checkHataDistance(distanceM); err != nil {
		return 0, err
	}
	f := m.CarrierHz / 1e6
	lf := math.Log10(f)
	lhb := math.Log10(m.BaseHeightM)
	var a float64
	if m.Environment == HataUrbanLarge {
		if f < 300 {
			x := math.Log10(1.54 * m.MobileHeightM)
			a = 8.29*x*x - 1.1
		} else {
			x := math.Log10(11.75 * m.MobileHeightM)
			a = 3.2*x*x - 4.97
		}
	} else {
		a = hataMobileCorrection(f, m.MobileHeightM)
	}
	l := 69.55 + 26.16*lf - 13.82*lhb - a + (44.9-6.55*lhb)*math.Log10(distanceM/1000)
	switch m.Environment {
	case HataSuburban:
		x := math.Log10(f / 28)
		l -= 2*x*x + 5.4
	case HataOpen:
		l -= 4.78*lf*lf - 18.33*lf + 40.94
	}
	return l, nil
}

// COST231Hata is the COST-231 extension of the Hata model to 1500–2000 MHz
// (COST 231 final report), with f in MHz, heights in m and d in km:
//
//	L = 46.3 + 33.9 log10 f − 13.82 log10 h_b − a(h_m) + (44.9 − 6.55 log10 h_b) log10 d + C_m
//
// a(h_m) the small/medium-city correction of Hata, C_m = 0 dB for medium
// cities and suburban areas and 3 dB for metropolitan centres. Valid for f
// in [1500, 2000] MHz, h_b in [30, 200] m, h_m in [1, 10] m, d in [1, 20] km.
type COST231Hata struct {
	CarrierHz     float64 // carrier, Hz, in [1500e6, 2000e6]
	BaseHeightM   float64 // h_b, m, in [30, 200]
	MobileHeightM float64 // h_m, m, in [1, 10]
	Metropolitan  bool    // C_m = 3 dB when true, else 0 dB
}

// Validate checks the carrier and the heights.
func (m COST231Hata) Validate() error {
	if err := checkRange("CarrierHz", m.CarrierHz, cost231MinHz, cost231MaxHz, "Hz"); err != nil {
		return err
	}
	return checkHataHeights(m.BaseHeightM, m.MobileHeightM)
}

// LossDB returns the COST-231 Hata median loss in dB at distanceM (in
// [1000, 20000] m).
func (m COST231Hata) LossDB(distanceM float64) (float64, error) {
	if err := m.Validate(); err != nil {
		return 0, err
	}
	if err := checkHataDistance(distanceM); err != nil {
		return 0, err
	}
	f := m.CarrierHz / 1e6
	lhb := math.Log10(m.BaseHeightM)
	l := 46.3 + 33.9*math.Log10(f) - 13.82*lhb - hataMobileCorrection(f, m.MobileHeightM) +
		(44.9-6.55*lhb)*math.Log10(distanceM/1000)
	if m.Metropolitan {
		l += 3
	}
	return l, nil
}
