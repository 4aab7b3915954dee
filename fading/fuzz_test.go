package fading

import (
	"context"
	"errors"
	"math"
	"testing"
)

// FuzzNewChannel feeds arbitrary numbers to the constructors and validators
// of the package: they must return a value or a *ParamError, never panic,
// and an accepted channel must produce finite gains.
func FuzzNewChannel(f *testing.F) {
	f.Add(55.6, 1500.0, 0.0, 310.0, -1.0, 6.0, 0.4, true, uint8(0), 0, 30.0, 1.5, 1000.0)
	f.Add(0.0, 1500.0, 0.0, 30.0, -3.0, 0.0, 0.0, false, uint8(1), 4, 50.0, 2.0, 5000.0)
	f.Add(749.0, 1500.0, 0.0, 10.0, 0.0, 60.0, 1.0, true, uint8(2), 0, 200.0, 10.0, 20000.0)
	f.Add(750.0, 1500.0, 5.0, 1.0, 0.0, 0.0, 0.0, false, uint8(0), 0, 29.0, 0.5, 999.0)
	f.Add(math.NaN(), math.Inf(1), math.NaN(), -1.0, math.Inf(-1), math.NaN(), math.Inf(1), true, uint8(9), -3, math.NaN(), math.NaN(), math.NaN())
	f.Add(1e-9, 1e9, 0.0, 1e300, 300.0, -60.0, -1e300, true, uint8(0), 256, 1e300, -1e300, 0.0)
	f.Fuzz(func(t *testing.T, fd, fs, d0, d1, p1, kdb, ang float64, los bool, gen uint8, sinus int, hb, hm, dist float64) {
		cfg := ChannelConfig{DopplerHz: fd, SampleRateHz: fs, Profile: Profile{Taps: []Tap{{d0, 0}, {d1, p1}}},
			RicianKDB: kdb, LOS: los, LOSAngleRad: ang, Generator: Generator(gen), Sinusoids: sinus}
		isParam := func(err error) {
			var pe *ParamError
			if err != nil && (!errors.As(err, &pe) || pe.Param == "" || pe.Rule == "") {
				t.Fatalf("error %v is not a *ParamError", err)
			}
		}
		ch, err := NewChannel(cfg, 1, 0)
		isParam(err)
		if err == nil {
			// keep the fuzz step cheap: a channel whose internal rate would
			// need huge FFT blocks is still exercised for a few samples
			g := make([]float64, 64)
			ch.FillGains(g)
			for _, v := range g {
				if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
					t.Fatalf("gain %g from accepted config %+v", v, cfg)
				}
			}
			taps := make([]complex64, 16*ch.NumTaps())
			ch.FillTaps(taps)
		}
		_, err = NewShadowing(ShadowingConfig{SigmaDB: kdb, DecorrelationM: d1, SpeedMps: fd, SamplePeriodS: 1 / fs}, NewStream(1, 0, 0, StreamShadowing))
		isParam(err)
		for _, m := range []PathLoss{
			FreeSpace{CarrierHz: fs * 1e6},
			LogDistance{RefDistanceM: d0, RefLossDB: p1, Exponent: kdb},
			Hata{CarrierHz: fs * 1e6, BaseHeightM: hb, MobileHeightM: hm, Environment: HataEnvironment(gen % 5)},
			COST231Hata{CarrierHz: fs * 1e6, BaseHeightM: hb, MobileHeightM: hm, Metropolitan: los},
		} {
			v, err := m.LossDB(dist)
			isParam(err)
			if err == nil && (math.IsNaN(v) || math.IsInf(v, 0)) {
				t.Fatalf("%T accepted %g m and returned %g", m, dist, v)
			}
		}
		// Check validates before any work; a cancelled context keeps the
		// fuzz step cheap for configurations that are accepted.
		ctx, cancel := context.WithCancel(context.Background())
		cancel()
		_, err = Check(ctx, CheckConfig{Channel: cfg, Links: sinus, DopplerPeriods: d1, Sigmas: ang})
		if !errors.Is(err, context.Canceled) {
			isParam(err)
		}
	})
}
