package service

import (
	"math"
	"testing"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// TestChannelSpeedAndCarrier: speed_kmh with carrier_hz stands in for
// doppler_hz, f_D = v·f_c/c. 120 km/h at 2 GHz: 33.33 m/s × 2e9 Hz /
// 299 792 458 m/s = 222.4 Hz (hand computation, c from SI definition).
func TestChannelSpeedAndCarrier(t *testing.T) {
	base := func() *pb.ChannelSpec {
		return &pb.ChannelSpec{SampleRateHz: 1500, Profile: "FLAT", Generator: pb.Generator_GENERATOR_DEFAULT}
	}
	sp := base()
	sp.SpeedKmh, sp.CarrierHz = 120, 2e9
	cfg, vs := channelConfigFromProto(sp, "channel.")
	if len(vs) > 0 || math.Abs(cfg.DopplerHz-222.4) > 0.05 {
		t.Errorf("120 km/h at 2 GHz: f_D %g Hz (%v), want 222.4", cfg.DopplerHz, vs)
	}
	for _, c := range []struct {
		name           string
		doppler, v, fc float64
		field          string
	}{
		{"both", 100, 30, 2e9, "channel.speed_kmh"},
		{"no carrier", 0, 30, 0, "channel.carrier_hz"},
		{"carrier alone", 0, 0, 2e9, "channel.carrier_hz"},
		// 1000 km/h at 100 GHz is 92.7 kHz, above half of 1500 Hz.
		{"Doppler too high", 0, 1000, 1e11, "channel.speed_kmh"},
	} {
		s := base()
		s.DopplerHz, s.SpeedKmh, s.CarrierHz = c.doppler, c.v, c.fc
		_, vs := channelConfigFromProto(s, "channel.")
		if len(vs) != 1 || vs[0].Field != c.field {
			t.Errorf("%s: violations %v, want one on %s", c.name, vs, c.field)
		}
	}
}
