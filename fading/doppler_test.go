package fading

import (
	"math"
	"testing"
)

// TestDoppler: f_D = v f_c / c; 120 km/h at 2 GHz is 222.4 Hz and
// 3 km/h at 2 GHz is 5.56 Hz (textbook (memory)); the Clarke spectrum
// integrates to one (Clarke 1968; Jakes 1974 (memory)).
func TestDoppler(t *testing.T) {
	if v := DopplerHz(120, 2e9); math.Abs(v-222.4) > 0.05 {
		t.Errorf("DopplerHz(120 km/h, 2 GHz) = %.3f", v)
	}
	if v := DopplerHz(3, 2e9); math.Abs(v-5.56) > 0.005 {
		t.Errorf("DopplerHz(3 km/h, 2 GHz) = %.4f", v)
	}
	if v := SpeedKmh(DopplerHz(50, 9e8), 9e8); math.Abs(v-50) > 1e-9 {
		t.Errorf("SpeedKmh round trip %g", v)
	}
	// midpoint rule on the substitution f = f_D sin φ removes the edge singularity
	const fd, n = 100.0, 20000
	sum := 0.0
	for i := 0; i < n; i++ {
		phi := -math.Pi/2 + (float64(i)+0.5)*math.Pi/n
		f := fd * math.Sin(phi)
		sum += ClarkeSpectrum(f, fd) * fd * math.Cos(phi) * math.Pi / n
	}
	if math.Abs(sum-1) > 1e-6 {
		t.Errorf("Clarke spectrum integrates to %g", sum)
	}
	if ClarkeSpectrum(150, fd) != 0 || !math.IsInf(ClarkeSpectrum(fd, fd), 1) {
		t.Error("Clarke spectrum outside or at the band edge")
	}
	if err := CheckDoppler(749.9, 1500); err != nil {
		t.Error(err)
	}
	if CheckDoppler(750, 1500) == nil || CheckDoppler(math.NaN(), 1500) == nil || CheckDoppler(1, 0) == nil {
		t.Error("CheckDoppler accepted bad input")
	}
}
