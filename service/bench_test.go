package service

import (
	"context"
	"errors"
	"io"
	"testing"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// BenchmarkStreamGains streams the complex tap gains of 64 three-tap links
// (30 km/h at 2 GHz, 1500 Hz) end to end over a real 127.0.0.1 TCP
// connection to a Go client, and reports complex samples per second
// received by the client (target >= 40e6).
func BenchmarkStreamGains(b *testing.B) {
	env := startEnv(b, viaLoopback, Config{MaxCost: 1e12})
	const links, samples = 64, 1 << 16
	req := &pb.StreamGainsRequest{
		Channel: &pb.ChannelSpec{DopplerHz: 55.6, SampleRateHz: 1500, Generator: pb.Generator_GENERATOR_DEFAULT,
			CustomTaps: []*pb.Tap{{DelayNs: 0}, {DelayNs: 100}, {DelayNs: 200}}},
		Links: links, Samples: samples, Seed: 1,
	}
	b.ReportAllocs()
	b.ResetTimer()
	var got int64
	for b.Loop() {
		st, err := env.channel.StreamGains(context.Background(), req)
		if err != nil {
			b.Fatal(err)
		}
		for {
			m, err := st.Recv()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				b.Fatal(err)
			}
			got += int64(len(m.GetGains()) / 8)
		}
	}
	b.ReportMetric(float64(got)/b.Elapsed().Seconds(), "complex-samples/s")
	b.ReportMetric(float64(got*8)/b.Elapsed().Seconds()/1e6, "MB/s")
}
