package fading

import (
	"fmt"
	"math"
	"testing"
)

// TestAssemblyMatchesGo: with AVX the interpolator and the oscillators run
// in assembly (interp_amd64.s); they must give the Go code's results bit
// for bit (same operations in the same order), so a run's figures do not
// depend on the machine. Every generator, several sinusoid counts (16 and
// 32 go through the sixteen-wide kernel, 20 and 7 also through the Go
// remainder), decimated and direct rates, chunked calls.
func TestAssemblyMatchesGo(t *testing.T) {
	if !useAVX {
		t.Skip("no AVX on this machine: only the Go code runs")
	}
	defer func(v bool) { useAVX = v }(useAVX)
	profs := []Profile{
		{Name: "1tap", Taps: []Tap{{0, 0}}},
		{Name: "3tap", Taps: []Tap{{0, 0}, {310, -1}, {710, -9}}},
		{Name: "7tap", Taps: []Tap{{0, 0}, {100, -1}, {200, -2}, {300, -3}, {500, -8}, {700, -10}, {900, -12}}},
	}
	for _, prof := range profs {
		for _, g := range []Generator{GeneratorDefault, GeneratorSumOfSinusoids, GeneratorSpectral} {
			for _, m := range []int{0, 7, 16, 20, 32} {
				for _, fdT := range []float64{0.037, 0.0037, 0.3} {
					name := fmt.Sprintf("%s/%v/M=%d/fdT=%g", prof.Name, g, m, fdT)
					gains := func(avx bool) []float64 {
						useAVX = avx
						ch, err := NewChannel(ChannelConfig{DopplerHz: fdT * 1500, SampleRateHz: 1500, Profile: prof, Generator: g, Sinusoids: m}, 11, 3)
						if err != nil {
							t.Fatal(err)
						}
						out := make([]float64, 6000)
						for off, n := 0, 1; off < len(out); off, n = off+n, n*2+1 {
							ch.FillGains(out[off:min(off+n, len(out))])
						}
						return out
					}
					a, b := gains(true), gains(false)
					for i := range a {
						if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
							t.Fatalf("%s: sample %d: assembly %v, Go %v", name, i, a[i], b[i])
						}
					}
				}
			}
		}
	}
}

// TestPlanCacheMatchesFillGains: channels advanced in step through one
// PlanCache (some with the same Doppler, so plans are shared, some not)
// give the gains of FillGains bit for bit, whatever the chunking.
func TestPlanCacheMatchesFillGains(t *testing.T) {
	prof := Profile{Name: "3tap", Taps: []Tap{{0, 0}, {310, -1}, {710, -9}}}
	fds := []float64{55.6, 55.6, 5.56, 55.6, 120, 5.56, 300, 55.6}
	gens := []Generator{GeneratorSumOfSinusoids, GeneratorDefault, GeneratorSumOfSinusoids, GeneratorSpectral, GeneratorSumOfSinusoids, GeneratorDefault, GeneratorSumOfSinusoids, GeneratorSumOfSinusoids}
	mk := func() []*Channel {
		var chs []*Channel
		for u, fd := range fds {
			ch, err := NewChannel(ChannelConfig{DopplerHz: fd, SampleRateHz: 1500, Profile: prof, Generator: gens[u], Sinusoids: 16}, 5, u)
			if err != nil {
				t.Fatal(err)
			}
			chs = append(chs, ch)
		}
		return chs
	}
	const total = 5000
	shared, alone := mk(), mk()
	var pc PlanCache
	got := make([][]float64, len(fds))
	want := make([][]float64, len(fds))
	for u := range fds {
		got[u] = make([]float64, total)
		want[u] = make([]float64, total)
	}
	hits := 0
	for off, n := 0, 1; off < total; off, n = off+n, min(n*3+1, 700) {
		end := min(off+n, total)
		for u := range fds {
			before := pc.next
			shared[u].FillGainsShared(got[u][off:end], &pc)
			if pc.next == before {
				hits++
			}
			alone[u].FillGains(want[u][off:end])
		}
	}
	for u := range fds {
		for i := range got[u] {
			if math.Float64bits(got[u][i]) != math.Float64bits(want[u][i]) {
				t.Fatalf("channel %d sample %d: shared plan %v, own plan %v", u, i, got[u][i], want[u][i])
			}
		}
	}
	if hits == 0 {
		t.Error("no plan was shared: the test does not exercise the cache")
	}
}

// TestFillGainsPairMatchesFillGains: FillGainsPair gives each channel the
// gains of FillGains bit for bit, whatever the chunking, for one-tap pairs
// on one plan (the AVX pair kernel), one-tap pairs at different
// Dopplers or positions (the plans part), and three-tap pairs (never the
// pair kernel); the same with the assembly off.
func TestFillGainsPairMatchesFillGains(t *testing.T) {
	oneTap := Profile{Name: "1tap", Taps: []Tap{{0, 0}}}
	threeTap := Profile{Name: "3tap", Taps: []Tap{{0, 0}, {310, -1}, {710, -9}}}
	cases := []struct {
		name     string
		prof     Profile
		fdA, fdB float64
		lagB     int // samples b is drawn ahead before the pairs start
		paired   bool
	}{
		{"one tap, one plan", oneTap, 55.6, 55.6, 0, true},
		{"one tap, slow", oneTap, 5.56, 5.56, 0, true},
		{"one tap, two Dopplers", oneTap, 55.6, 120, 0, false},
		{"one tap, b ahead", oneTap, 55.6, 55.6, 37, false},
		{"three taps", threeTap, 55.6, 55.6, 0, false},
	}
	defer func(v bool) { useAVX = v }(useAVX)
	for _, avx := range []bool{true, false} {
		if avx && !useAVX {
			continue
		}
		for _, c := range cases {
			useAVX = avx
			mk := func(fd float64, u int) *Channel {
				ch, err := NewChannel(ChannelConfig{DopplerHz: fd, SampleRateHz: 1500, Profile: c.prof}, 9, u)
				if err != nil {
					t.Fatal(err)
				}
				return ch
			}
			a, b, a1, b1 := mk(c.fdA, 1), mk(c.fdB, 2), mk(c.fdA, 1), mk(c.fdB, 2)
			const total = 4000
			gotA, gotB := make([]float64, total), make([]float64, total+c.lagB)
			wantA, wantB := make([]float64, total), make([]float64, total+c.lagB)
			b.FillGains(gotB[:c.lagB])
			var pc PlanCache
			pairs := 0
			for off, n := 0, 1; off < total; off, n = off+n, min(n*3+1, 700) {
				end := min(off+n, total)
				FillGainsPair(gotA[off:end], gotB[c.lagB+off:c.lagB+end], a, b, &pc)
				pairs++
			}
			a1.FillGains(wantA)
			b1.FillGains(wantB)
			for i := range wantA {
				if math.Float64bits(gotA[i]) != math.Float64bits(wantA[i]) {
					t.Fatalf("avx %v, %s: channel a sample %d: pair %v, alone %v", avx, c.name, i, gotA[i], wantA[i])
				}
			}
			for i := range wantB {
				if math.Float64bits(gotB[i]) != math.Float64bits(wantB[i]) {
					t.Fatalf("avx %v, %s: channel b sample %d: pair %v, alone %v", avx, c.name, i, gotB[i], wantB[i])
				}
			}
			if pairs == 0 {
				t.Fatalf("%s: no pair call", c.name)
			}
		}
	}
}
