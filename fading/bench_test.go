package fading

import (
	"fmt"
	"testing"
)

// BenchmarkGenerators measures the throughput of each generator on a 3-tap
// channel at f_D·T = 0.037 and 0.0037 (55.6 Hz and 5.56 Hz at 1500
// samples/s) through FillGains (the loop's hot path) and FillTaps (the trace
// stream). One path-sample is one complex tap sample.
func BenchmarkGenerators(b *testing.B) {
	prof := Profile{Name: "3tap", Taps: []Tap{{0, 0}, {310, -1}, {710, -9}}}
	const fs = 1500.0
	for _, g := range []Generator{GeneratorDefault, GeneratorSumOfSinusoids, GeneratorSpectral} {
		for _, fd := range []float64{55.6, 5.56} {
			for _, kind := range []string{"gains", "taps"} {
				name := fmt.Sprintf("%v/fdT=%.4f/%s", g, fd/fs, kind)
				b.Run(name, func(b *testing.B) {
					ch, err := NewChannel(ChannelConfig{DopplerHz: fd, SampleRateHz: fs, Profile: prof, Generator: g}, 7, 0)
					if err != nil {
						b.Fatal(err)
					}
					const n = 4096
					gains := make([]float64, n)
					taps := make([]complex64, n*ch.NumTaps())
					b.ReportAllocs()
					b.ResetTimer()
					for i := 0; i < b.N; i++ {
						if kind == "gains" {
							ch.FillGains(gains)
						} else {
							ch.FillTaps(taps)
						}
					}
					b.ReportMetric(float64(b.N)*n*float64(ch.NumTaps())/b.Elapsed().Seconds(), "path-samples/s")
				})
			}
		}
	}
}
