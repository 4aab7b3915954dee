package fading

import (
	"math"
	"testing"
)

// TestPrefetchChangesNothing: the prefetch hints read only the channel's
// position and index inside its buffers, at every point of a run (before
// the first fill, across internal blocks, decimated and direct rates, one
// and three taps, any sample count), and the gains stay bit for bit those
// of a channel never hinted.
func TestPrefetchChangesNothing(t *testing.T) {
	oneTap := Profile{Name: "1tap", Taps: []Tap{{0, 0}}}
	threeTap := Profile{Name: "3tap", Taps: []Tap{{0, 0}, {310, -1}, {710, -9}}}
	for _, prof := range []Profile{oneTap, threeTap} {
		for _, fd := range []float64{5.56, 55.6, 450} {
			mk := func() *Channel {
				ch, err := NewChannel(ChannelConfig{DopplerHz: fd, SampleRateHz: 1500, Profile: prof}, 4, 2)
				if err != nil {
					t.Fatal(err)
				}
				return ch
			}
			a, b := mk(), mk()
			const total = 6000
			got, want := make([]float64, total), make([]float64, total)
			a.PrefetchState()
			a.PrefetchSamples(0)
			a.PrefetchSamples(1 << 20)
			for off, n := 0, 1; off < total; off, n = off+n, min(n*2+1, 500) {
				end := min(off+n, total)
				a.PrefetchState()
				a.PrefetchSamples(end - off)
				a.FillGains(got[off:end])
				b.FillGains(want[off:end])
			}
			for i := range want {
				if math.Float64bits(got[i]) != math.Float64bits(want[i]) {
					t.Fatalf("%s at %g Hz: sample %d: hinted %v, not %v", prof.Name, fd, i, got[i], want[i])
				}
			}
		}
	}
}
