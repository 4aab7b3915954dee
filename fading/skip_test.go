package fading

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// skipRef is the reference stream of one configuration: a twin channel
// filled in one call, as gains and as float64 taps.
type skipRef struct {
	gains  []float64
	re, im [][]float64
}

func newSkipRef(t *testing.T, cfg ChannelConfig, user, n int) skipRef {
	t.Helper()
	g, err := NewChannel(cfg, 77, user)
	if err != nil {
		t.Fatal(err)
	}
	r := skipRef{gains: make([]float64, n)}
	g.FillGains(r.gains)
	tp, _ := NewChannel(cfg, 77, user)
	r.re, r.im = make2(tp.NumTaps(), n), make2(tp.NumTaps(), n)
	tp.fillComplex(r.re, r.im)
	return r
}

// The ways of reading a channel that Skip must be consistent with.
type skipReader int

const (
	readGains       skipReader = iota // FillGains
	readShared                        // FillGainsShared with a PlanCache
	readTaps                          // FillTaps (complex64)
	readTapsFloat64                   // fillComplex (the float64 taps behind FillTaps)
)

func (r skipReader) String() string {
	return [...]string{"FillGains", "FillGainsShared", "FillTaps", "fillComplex"}[r]
}

// readAndCompare reads n samples of ch with reader r and returns the first
// sample, counted from off, that differs from ref (bit for bit), or -1.
func readAndCompare(ch *Channel, r skipReader, pc *PlanCache, ref skipRef, off, n int) int {
	L := ch.NumTaps()
	switch r {
	case readGains, readShared:
		g := make([]float64, n)
		if r == readGains {
			ch.FillGains(g)
		} else {
			ch.FillGainsShared(g, pc)
		}
		for i := range g {
			if g[i] != ref.gains[off+i] {
				return i
			}
		}
	case readTaps:
		d := make([]complex64, n*L)
		ch.FillTaps(d)
		for i := 0; i < n; i++ {
			for l := 0; l < L; l++ {
				if d[i*L+l] != complex(float32(ref.re[l][off+i]), float32(ref.im[l][off+i])) {
					return i
				}
			}
		}
	case readTapsFloat64:
		re, im := make2(L, n), make2(L, n)
		ch.fillComplex(re, im)
		for i := 0; i < n; i++ {
			for l := 0; l < L; l++ {
				if re[l][i] != ref.re[l][off+i] || im[l][i] != ref.im[l][off+i] {
					return i
				}
			}
		}
	}
	return -1
}

// skipCases: every generator (and the static channel) × decimating
// (f_D·T = 0.037: 55.6 Hz at 1500 Hz, 30 km/h at 2 GHz) and direct
// (f_D·T = 0.2) × one tap and VEHA × LOS off/on.
func skipCases(t *testing.T) []ChannelConfig {
	veha, err := BuiltinProfile("VEHA")
	if err != nil {
		t.Fatal(err)
	}
	flat, err := BuiltinProfile("FLAT")
	if err != nil {
		t.Fatal(err)
	}
	var cs []ChannelConfig
	for _, g := range []Generator{GeneratorDefault, GeneratorSumOfSinusoids, GeneratorSpectral} {
		for _, fd := range []float64{55.6, 300, 0} {
			if fd == 0 && g != GeneratorDefault {
				continue // the static channel does not depend on the generator
			}
			for _, p := range []Profile{flat, veha} {
				for _, los := range []bool{false, true} {
					cs = append(cs, ChannelConfig{DopplerHz: fd, SampleRateHz: 1500, Profile: p,
						Generator: g, LOS: los, RicianKDB: 3, LOSAngleRad: 0.7})
				}
			}
		}
	}
	return cs
}

func skipName(cfg ChannelConfig) string {
	return fmt.Sprintf("%v/fdT=%.3f/%s/LOS=%v", cfg.Generator, cfg.DopplerHz/cfg.SampleRateHz, cfg.Profile.Name, cfg.LOS)
}

// blockOut returns the number of output samples per internal block of ch
// (rounded), the length of "exactly a block" in the tests.
func blockOut(ch *Channel) int { return int(float64(ch.blk)/ch.step + 0.5) }

// TestSkip: a channel that fills pre samples, skips n and fills m gives,
// bit for bit, samples pre+n .. pre+n+m−1 of a twin filled in one call, for
// every reader (FillGains, FillGainsShared with a PlanCache, FillTaps and
// its float64 taps), with n = 0, 1, less than a block, exactly one
// internal block (in internal and in output samples), one past it, three
// blocks and 50 000 samples (37 blocks at f_D·T = 0.037; 20 000 under
// -short).
func TestSkip(t *testing.T) {
	m, pre1, big := 1500, 777, 50000
	readers := []skipReader{readGains, readShared, readTaps, readTapsFloat64}
	if testing.Short() {
		m, pre1, big = 300, 301, 20000
	}
	if raceEnabled { // the same paths, fewer samples: FillTaps is fillComplex rounded
		m, pre1, big = 300, 301, 12000
		readers = []skipReader{readGains, readShared, readTapsFloat64}
	}
	for _, cfg := range skipCases(t) {
		t.Run(skipName(cfg), func(t *testing.T) {
			probe, _ := NewChannel(cfg, 77, 1)
			bo := blockOut(probe)
			ns := []int{0, 1, 100, probe.blk, bo - 1, bo, bo + 1, 3 * bo, big}
			total := 0
			for _, n := range ns {
				total = max(total, pre1+n+m)
			}
			ref := newSkipRef(t, cfg, 1, total)
			for _, pre := range []int{0, pre1} {
				for _, n := range ns {
					for _, r := range readers {
						ch, _ := NewChannel(cfg, 77, 1)
						var pc PlanCache
						if pre > 0 && readAndCompare(ch, r, &pc, ref, 0, pre) >= 0 {
							t.Fatalf("%v: the first %d samples differ before any Skip", r, pre)
						}
						ch.Skip(n)
						if i := readAndCompare(ch, r, &pc, ref, pre+n, m); i >= 0 {
							t.Fatalf("fill %d, Skip(%d), %v: sample %d after the skip differs from the one-call twin", pre, n, r, i)
						}
					}
				}
			}
		})
	}
}

// TestSkipMixed: seeded random sequences of Fill and Skip calls of random
// lengths (0 to four internal blocks, 60 000 samples in all, 20 000 under
// -short) read the same samples as the one-call twin at the same offsets,
// for every reader.
func TestSkipMixed(t *testing.T) {
	total := 60000
	if testing.Short() {
		total = 20000
	}
	if raceEnabled {
		total = 8000
	}
	for ci, cfg := range skipCases(t) {
		t.Run(skipName(cfg), func(t *testing.T) {
			ref := newSkipRef(t, cfg, 2, total+1)
			probe, _ := NewChannel(cfg, 77, 2)
			span := 4 * blockOut(probe)
			for r := readGains; r <= readTapsFloat64; r++ {
				rng := rand.New(rand.NewPCG(uint64(ci), uint64(r)))
				ch, _ := NewChannel(cfg, 77, 2)
				var pc PlanCache
				off, ops := 0, 0
				for off < total {
					n := min(total-off, rng.IntN(span+1))
					if rng.IntN(5) == 0 {
						n = min(total-off, rng.IntN(40)) // short calls: within one block
					}
					if rng.IntN(2) == 0 {
						ch.Skip(n)
					} else if i := readAndCompare(ch, r, &pc, ref, off, n); i >= 0 {
						t.Fatalf("%v: call %d (fill %d at %d): sample %d differs from the one-call twin", r, ops, n, off, i)
					}
					off += n
					ops++
				}
				if i := readAndCompare(ch, r, &pc, ref, total, 1); i >= 0 {
					t.Fatalf("%v: last sample differs", r)
				}
			}
		})
	}
}

// TestSkipSharedPlans: two links of the same speed, brought to the same
// output index by different Fill and Skip histories, share the
// interpolation plans of one PlanCache (the second link computes none) and
// each still gives its own one-call twin's gains bit for bit.
func TestSkipSharedPlans(t *testing.T) {
	veha, _ := BuiltinProfile("VEHA")
	for _, g := range []Generator{GeneratorDefault, GeneratorSumOfSinusoids, GeneratorSpectral} {
		for _, los := range []bool{false, true} {
			cfg := ChannelConfig{DopplerHz: 55.6, SampleRateHz: 1500, Profile: veha, Generator: g, LOS: los, RicianKDB: 3, LOSAngleRad: 0.7}
			const at, n = 31128, 3000
			refA, refB := newSkipRef(t, cfg, 1, at+n), newSkipRef(t, cfg, 2, at+n)
			a, _ := NewChannel(cfg, 77, 1)
			b, _ := NewChannel(cfg, 77, 2)
			var pc PlanCache
			if readAndCompare(a, readShared, &pc, refA, 0, 1000) >= 0 {
				t.Fatalf("%s: link A differs before any Skip", skipName(cfg))
			}
			a.Skip(30000)
			if readAndCompare(a, readShared, &pc, refA, 31000, 123) >= 0 {
				t.Fatalf("%s: link A differs after Skip(30000)", skipName(cfg))
			}
			a.Skip(5)
			b.Skip(20000)
			if readAndCompare(b, readGains, nil, refB, 20000, 7000) >= 0 {
				t.Fatalf("%s: link B differs after Skip(20000)", skipName(cfg))
			}
			b.Skip(4128)
			if a.m != at || b.m != at {
				t.Fatalf("test set-up: links at %d and %d, want %d", a.m, b.m, at)
			}
			for off := at; off < at+n; off += 500 {
				if i := readAndCompare(a, readShared, &pc, refA, off, 500); i >= 0 {
					t.Fatalf("%s: link A sample %d differs", skipName(cfg), off+i)
				}
				made := pc.next
				if i := readAndCompare(b, readShared, &pc, refB, off, 500); i >= 0 {
					t.Fatalf("%s: link B sample %d differs", skipName(cfg), off+i)
				}
				if pc.next != made {
					t.Fatalf("%s: link B computed its own plans at %d (cache misses after Skip)", skipName(cfg), off)
				}
			}
		}
	}
}

// TestSkipNegativePanics: a negative count is a programmer error.
func TestSkipNegativePanics(t *testing.T) {
	ch, err := NewChannel(ChannelConfig{DopplerHz: 55.6, SampleRateHz: 1500, Profile: testProfile}, 1, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer func() {
		if recover() == nil {
			t.Error("Skip(-1) did not panic")
		}
	}()
	ch.Skip(-1)
}
