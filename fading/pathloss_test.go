package fading

import (
	"errors"
	"math"
	"strings"
	"testing"
)

// TestHataValues checks the models against published values to 0.01 dB.
func TestHataValues(t *testing.T) {
	cases := []struct {
		name string
		m    PathLoss
		d, L float64
	}{
		// Hata, IEEE Trans. Veh. Technol. 29(3), 1980 (formula from memory)
		{"urban 1 km", Hata{CarrierHz: 900e6, BaseHeightM: 30, MobileHeightM: 1.5}, 1000, 126.40},
		{"urban 10 km", Hata{CarrierHz: 900e6, BaseHeightM: 30, MobileHeightM: 1.5}, 10000, 161.63},
		{"suburban 1 km", Hata{CarrierHz: 900e6, BaseHeightM: 30, MobileHeightM: 1.5, Environment: HataSuburban}, 1000, 116.46},
		// COST 231 final report (memory)
		{"COST-231 1800 MHz 1 km", COST231Hata{CarrierHz: 1800e6, BaseHeightM: 30, MobileHeightM: 1.5}, 1000, 136.20},
	}
	for _, c := range cases {
		got, err := c.m.LossDB(c.d)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if math.Abs(got-c.L) > 0.01 {
			t.Errorf("%s: %.3f dB, want %.2f dB", c.name, got, c.L)
		}
	}
	// Relations of the corrections (Hata 1980, formula from memory): open is
	// below suburban is below urban; metropolitan COST-231 adds 3 dB; the
	// large-city correction at h_m = 1.5 m differs from the medium-city one
	// by less than 0.1 dB at 900 MHz.
	u, _ := Hata{CarrierHz: 900e6, BaseHeightM: 30, MobileHeightM: 1.5}.LossDB(5000)
	s, _ := Hata{CarrierHz: 900e6, BaseHeightM: 30, MobileHeightM: 1.5, Environment: HataSuburban}.LossDB(5000)
	o, _ := Hata{CarrierHz: 900e6, BaseHeightM: 30, MobileHeightM: 1.5, Environment: HataOpen}.LossDB(5000)
	lg, _ := Hata{CarrierHz: 900e6, BaseHeightM: 30, MobileHeightM: 1.5, Environment: HataUrbanLarge}.LossDB(5000)
	if !(o < s && s < u) || math.Abs(lg-u) > 0.1 {
		t.Errorf("environment ordering: urban %.2f large %.2f suburban %.2f open %.2f", u, lg, s, o)
	}
	c0, _ := COST231Hata{CarrierHz: 1800e6, BaseHeightM: 30, MobileHeightM: 1.5}.LossDB(3000)
	c3, _ := COST231Hata{CarrierHz: 1800e6, BaseHeightM: 30, MobileHeightM: 1.5, Metropolitan: true}.LossDB(3000)
	if math.Abs(c3-c0-3) > 1e-9 {
		t.Errorf("metropolitan correction %.3f dB, want 3", c3-c0)
	}
}

// TestFreeSpaceAndLogDistance: Friis free-space loss, 91.53 dB at 1 km and
// 900 MHz and +6.02 dB per doubling of distance (textbook (memory));
// log-distance L0 + 10 n log10(d/d0).
func TestFreeSpaceAndLogDistance(t *testing.T) {
	fs := FreeSpace{CarrierHz: 900e6}
	a, _ := fs.LossDB(1000)
	b, _ := fs.LossDB(2000)
	if math.Abs(a-91.53) > 0.01 || math.Abs(b-a-20*math.Log10(2)) > 1e-9 {
		t.Errorf("free space: %.3f dB at 1 km, %+.3f dB per doubling", a, b-a)
	}
	ld := LogDistance{RefDistanceM: 100, RefLossDB: 80, Exponent: 3.5}
	if v, _ := ld.LossDB(1000); math.Abs(v-115) > 1e-9 {
		t.Errorf("log-distance at 10 d0: %.3f, want 115", v)
	}
}

// TestPathLossValidity: inputs outside a model's range are rejected with a
// *ParamError naming the parameter and stating the range.
func TestPathLossValidity(t *testing.T) {
	nan := math.NaN()
	good := Hata{CarrierHz: 900e6, BaseHeightM: 30, MobileHeightM: 1.5}
	cases := []struct {
		name  string
		m     PathLoss
		d     float64
		param string
	}{
		{"Hata f low", Hata{CarrierHz: 100e6, BaseHeightM: 30, MobileHeightM: 1.5}, 1000, "CarrierHz"},
		{"Hata f high", Hata{CarrierHz: 1800e6, BaseHeightM: 30, MobileHeightM: 1.5}, 1000, "CarrierHz"},
		{"Hata hb low", Hata{CarrierHz: 900e6, BaseHeightM: 20, MobileHeightM: 1.5}, 1000, "BaseHeightM"},
		{"Hata hb high", Hata{CarrierHz: 900e6, BaseHeightM: 250, MobileHeightM: 1.5}, 1000, "BaseHeightM"},
		{"Hata hm low", Hata{CarrierHz: 900e6, BaseHeightM: 30, MobileHeightM: 0.5}, 1000, "MobileHeightM"},
		{"Hata hm high", Hata{CarrierHz: 900e6, BaseHeightM: 30, MobileHeightM: 12}, 1000, "MobileHeightM"},
		{"Hata d short", good, 500, "DistanceM"},
		{"Hata d long", good, 25000, "DistanceM"},
		{"Hata d NaN", good, nan, "DistanceM"},
		{"Hata env", Hata{CarrierHz: 900e6, BaseHeightM: 30, MobileHeightM: 1.5, Environment: 9}, 1000, "Environment"},
		{"COST f low", COST231Hata{CarrierHz: 900e6, BaseHeightM: 30, MobileHeightM: 1.5}, 1000, "CarrierHz"},
		{"COST f high", COST231Hata{CarrierHz: 2100e6, BaseHeightM: 30, MobileHeightM: 1.5}, 1000, "CarrierHz"},
		{"COST d", COST231Hata{CarrierHz: 1800e6, BaseHeightM: 30, MobileHeightM: 1.5}, 30000, "DistanceM"},
		{"free space f", FreeSpace{CarrierHz: 0}, 1000, "CarrierHz"},
		{"free space d", FreeSpace{CarrierHz: 900e6}, -1, "DistanceM"},
		{"log-distance n", LogDistance{RefDistanceM: 1, RefLossDB: 40, Exponent: 0}, 10, "Exponent"},
		{"log-distance d0", LogDistance{RefDistanceM: nan, RefLossDB: 40, Exponent: 3}, 10, "RefDistanceM"},
		{"log-distance d < d0", LogDistance{RefDistanceM: 10, RefLossDB: 40, Exponent: 3}, 5, "DistanceM"},
	}
	for _, c := range cases {
		_, err := c.m.LossDB(c.d)
		var pe *ParamError
		if !errors.As(err, &pe) || pe.Param != c.param {
			t.Errorf("%s: err = %v, want a *ParamError for %s", c.name, err, c.param)
			continue
		}
		if strings.HasPrefix(c.name, "Hata") && c.param != "Environment" && !strings.Contains(pe.Rule, "[") {
			t.Errorf("%s: rule %q does not state the range", c.name, pe.Rule)
		}
	}
}
