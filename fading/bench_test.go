package fading

import (
	"fmt"
	"syscall"
	"testing"
	"time"
)

// cpuTime is the process's user + system CPU time (a figure less disturbed
// than wall-clock time on a shared machine).
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

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

// BenchmarkCanonicalGains measures FillGains on the channel of the loop's
// canonical scenario (3 equal taps, sum of 16 sinusoids per branch,
// f_D·T = 0.037): the generation cost behind loop's BenchmarkCanonical.
func BenchmarkCanonicalGains(b *testing.B) {
	prof := Profile{Name: "3eq", Taps: []Tap{{0, 0}, {100, 0}, {200, 0}}}
	ch, err := NewChannel(ChannelConfig{DopplerHz: 55.56, SampleRateHz: 1500, Profile: prof, Generator: GeneratorSumOfSinusoids, Sinusoids: 16}, 7, 0)
	if err != nil {
		b.Fatal(err)
	}
	const n = 512
	gains := make([]float64, n)
	b.ReportAllocs()
	c0 := cpuTime()
	for b.Loop() {
		ch.FillGains(gains)
	}
	b.ReportMetric(float64(b.N)*n/b.Elapsed().Seconds(), "samples/s")
	b.ReportMetric(float64(cpuTime()-c0)/float64(b.N), "cpu-ns/op")
}

// BenchmarkCanonicalGains64 is BenchmarkCanonicalGains over 64 such
// channels in turn, 512 samples each (the loop's access pattern: every
// channel's state is cold when its turn comes).
func BenchmarkCanonicalGains64(b *testing.B) {
	prof := Profile{Name: "3eq", Taps: []Tap{{0, 0}, {100, 0}, {200, 0}}}
	chs := make([]*Channel, 64)
	for u := range chs {
		ch, err := NewChannel(ChannelConfig{DopplerHz: 55.56, SampleRateHz: 1500, Profile: prof, Generator: GeneratorSumOfSinusoids, Sinusoids: 16}, 7, u)
		if err != nil {
			b.Fatal(err)
		}
		chs[u] = ch
	}
	const n = 512
	gains := make([]float64, n*len(chs))
	b.ReportAllocs()
	c0 := cpuTime()
	for b.Loop() {
		for u, ch := range chs {
			ch.FillGains(gains[u*n : (u+1)*n])
		}
	}
	b.ReportMetric(float64(b.N)*n*float64(len(chs))/b.Elapsed().Seconds(), "samples/s")
	b.ReportMetric(float64(cpuTime()-c0)/float64(b.N)/float64(len(chs)), "cpu-ns/channel-block")
}

// BenchmarkSkip compares Skip(n) with FillGains of the same n samples (the
// cost of keeping an unused link's stream at the slot clock against
// generating it) on a 3-tap channel, for every generator, decimating
// (f_D·T = 0.037: 55.6 Hz at 1500 samples/s) and direct (f_D·T = 0.2), and
// n = 64 and 15000. Skip's figure includes the random draws of the blocks
// passed over; the up to two blocks that the next Fill call would generate
// are not part of it (a link that only skips never generates them).
func BenchmarkSkip(b *testing.B) {
	prof := Profile{Name: "3tap", Taps: []Tap{{0, 0}, {310, -1}, {710, -9}}}
	const fs = 1500.0
	for _, g := range []Generator{GeneratorDefault, GeneratorSumOfSinusoids, GeneratorSpectral} {
		for _, fd := range []float64{55.6, 300} {
			for _, n := range []int{64, 15000} {
				for _, kind := range []string{"skip", "fill"} {
					b.Run(fmt.Sprintf("%v/fdT=%.3f/n=%d/%s", g, fd/fs, n, kind), func(b *testing.B) {
						ch, err := NewChannel(ChannelConfig{DopplerHz: fd, SampleRateHz: fs, Profile: prof, Generator: g}, 7, 0)
						if err != nil {
							b.Fatal(err)
						}
						gains := make([]float64, n)
						b.ReportAllocs()
						for b.Loop() {
							if kind == "skip" {
								ch.Skip(n)
							} else {
								ch.FillGains(gains)
							}
						}
					})
				}
			}
		}
	}
}
