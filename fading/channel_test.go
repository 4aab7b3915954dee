package fading

import (
	"errors"
	"math"
	"runtime"
	"sync"
	"testing"
)

var testProfile = Profile{Name: "3tap", Taps: []Tap{{0, 0}, {310, -1}, {710, -9}}}

func channelCases() []ChannelConfig {
	var cs []ChannelConfig
	for _, g := range []Generator{GeneratorDefault, GeneratorSumOfSinusoids, GeneratorSpectral} {
		for _, fd := range []float64{0, 5.56, 55.6, 300} { // static, interpolated, (default/spectral: interpolated), direct
			for _, los := range []bool{false, true} {
				cs = append(cs, ChannelConfig{DopplerHz: fd, SampleRateHz: 1500, Profile: testProfile,
					Generator: g, LOS: los, RicianKDB: 6, LOSAngleRad: 0.4})
			}
		}
	}
	return cs
}

// TestStreamingEquivalence: a channel advanced chunk by chunk gives the same
// samples, bit for bit, as one long call, for FillTaps and FillGains.
func TestStreamingEquivalence(t *testing.T) {
	const n = 6000 // crosses several internal blocks of every generator
	chunks := []int{1, 7, 255, 256, 257, 1000, 3, 4096}
	for _, cfg := range channelCases() {
		whole, err := NewChannel(cfg, 42, 3)
		if err != nil {
			t.Fatal(err)
		}
		L := whole.NumTaps()
		want := make([]complex64, n*L)
		whole.FillTaps(want)
		parts, _ := NewChannel(cfg, 42, 3)
		got := make([]complex64, n*L)
		for off, i := 0, 0; off < n; i++ {
			c := min(chunks[i%len(chunks)], n-off)
			parts.FillTaps(got[off*L : (off+c)*L])
			off += c
		}
		for i := range want {
			if got[i] != want[i] {
				t.Fatalf("%v f_D=%g LOS=%v: FillTaps sample %d differs: %v vs %v", cfg.Generator, cfg.DopplerHz, cfg.LOS, i, got[i], want[i])
			}
		}
		gw, _ := NewChannel(cfg, 42, 3)
		gp, _ := NewChannel(cfg, 42, 3)
		wg := make([]float64, n)
		gw.FillGains(wg)
		pg := make([]float64, n)
		for off, i := 0, 0; off < n; i++ {
			c := min(chunks[(i+3)%len(chunks)], n-off)
			gp.FillGains(pg[off : off+c])
			off += c
		}
		for i := range wg {
			if wg[i] != pg[i] {
				t.Fatalf("%v f_D=%g LOS=%v: FillGains sample %d differs", cfg.Generator, cfg.DopplerHz, cfg.LOS, i)
			}
			// FillGains is the same process as FillTaps: Σ|h_l|² (to complex64 precision)
			s := 0.0
			for l := 0; l < L; l++ {
				h := want[i*L+l]
				s += float64(real(h))*float64(real(h)) + float64(imag(h))*float64(imag(h))
			}
			if math.Abs(s-wg[i]) > 1e-5*(1+wg[i]) {
				t.Fatalf("%v f_D=%g: gain %g, Σ|h|² of taps %g", cfg.Generator, cfg.DopplerHz, wg[i], s)
			}
		}
	}
}

// TestDeterminism: same (seed, user) same samples, whatever the goroutine
// or GOMAXPROCS; different users, seeds and taps give different processes.
func TestDeterminism(t *testing.T) {
	fill := func(cfg ChannelConfig, seed uint64, user int) []complex64 {
		ch, err := NewChannel(cfg, seed, user)
		if err != nil {
			t.Fatal(err)
		}
		out := make([]complex64, 2000*ch.NumTaps())
		ch.FillTaps(out)
		return out
	}
	for _, g := range []Generator{GeneratorDefault, GeneratorSumOfSinusoids, GeneratorSpectral} {
		cfg := ChannelConfig{DopplerHz: 55.6, SampleRateHz: 1500, Profile: testProfile, Generator: g}
		ref := fill(cfg, 1, 0)
		if !equalC(ref, fill(cfg, 1, 0)) {
			t.Errorf("%v: same seed gives different samples", g)
		}
		if equalC(ref, fill(cfg, 1, 1)) || equalC(ref, fill(cfg, 2, 0)) {
			t.Errorf("%v: different user or seed gives the same samples", g)
		}
		L := len(testProfile.Taps)
		for l := 1; l < L; l++ { // taps are different processes (not scaled copies)
			r0 := real(ref[0]) / real(ref[l])
			same := true
			for i := 1; i < 50 && same; i++ {
				same = math.Abs(float64(real(ref[i*L])/real(ref[i*L+l])-r0)) < 1e-3
			}
			if same {
				t.Errorf("%v: tap %d is a scaled copy of tap 0", g, l)
			}
		}
		// concurrent generation under another GOMAXPROCS gives the same samples
		old := runtime.GOMAXPROCS(1)
		var wg sync.WaitGroup
		res := make([][]complex64, 4)
		for k := range res {
			wg.Add(1)
			go func() { defer wg.Done(); res[k] = fill(cfg, 1, 0) }()
		}
		wg.Wait()
		runtime.GOMAXPROCS(old)
		for k := range res {
			if !equalC(ref, res[k]) {
				t.Errorf("%v: goroutine %d differs", g, k)
			}
		}
	}
	if NewStream(1, 2, 3, StreamTap).Uint64() == NewStream(1, 2, 3, StreamShadowing).Uint64() ||
		NewStream(1, 2, 3, StreamTap).Uint64() == NewStream(1, 2, 4, StreamTap).Uint64() ||
		NewStream(1, 2, 3, StreamTap).Uint64() != NewStream(1, 2, 3, StreamTap).Uint64() {
		t.Error("NewStream streams are not distinct per (user, index, kind) or not reproducible")
	}
}

func equalC(a, b []complex64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// TestTapPowersAndIndependence: each tap's mean power is its normalised
// profile power and taps are uncorrelated (ensemble over links). Tolerance:
// 4 standard errors over the links plus 0.01.
func TestTapPowersAndIndependence(t *testing.T) {
	p, _ := BuiltinProfile("EVA")
	w := p.NormalisedPowers()
	L := len(w)
	links, n := 64, 5400 // 200 Doppler periods at f_D·T = 0.037
	if raceEnabled {
		links = 24
	}
	if !testing.Short() {
		links = 256
	}
	pw := make([][]float64, L)
	cross := make([]float64, links)
	for u := 0; u < links; u++ {
		ch, err := NewChannel(ChannelConfig{DopplerHz: 55.6, SampleRateHz: 1500, Profile: p}, 11, u)
		if err != nil {
			t.Fatal(err)
		}
		re, im := make2(L, n), make2(L, n)
		ch.fillComplex(re, im)
		for l := 0; l < L; l++ {
			s := 0.0
			for i := 0; i < n; i++ {
				s += re[l][i]*re[l][i] + im[l][i]*im[l][i]
			}
			pw[l] = append(pw[l], s/float64(n)/w[l])
		}
		s := 0.0 // normalised correlation of taps 0 and 4 (the two strongest)
		for i := 0; i < n; i++ {
			s += re[0][i]*re[4][i] + im[0][i]*im[4][i]
		}
		cross[u] = s / float64(n) / math.Sqrt(w[0]*w[4])
	}
	for l := 0; l < L; l++ {
		m, se := meanSE(pw[l])
		if math.Abs(m-1) > 4*se+0.01 {
			t.Errorf("tap %d: mean power / profile power = %.4f ± %.4f, want 1", l, m, 4*se+0.01)
		}
	}
	if m, se := meanSE(cross); math.Abs(m) > 4*se+0.01 {
		t.Errorf("taps 0 and 4 correlate: %.4f ± %.4f", m, 4*se+0.01)
	}
}

// TestLongRunPower: the oscillators are restarted exactly every block, so
// the power after many samples is still unit (no drift of the recursions).
// Tolerance: 4 standard errors over the links plus 0.01.
func TestLongRunPower(t *testing.T) {
	skip, links := 1<<18, 16
	if raceEnabled {
		skip, links = 1<<16, 8
	}
	if !testing.Short() {
		skip, links = 1<<22, 32
	}
	for _, g := range []Generator{GeneratorDefault, GeneratorSumOfSinusoids} {
		pows := make([]float64, links)
		junk := make([]float64, 1<<16)
		meas := make([]float64, 27*400)
		for u := 0; u < links; u++ {
			ch, _ := NewChannel(ChannelConfig{DopplerHz: 55.6, SampleRateHz: 1500, Profile: Profile{Taps: []Tap{{0, 0}}}, Generator: g}, 3, u)
			for k := 0; k < skip; k += len(junk) {
				ch.FillGains(junk)
			}
			ch.FillGains(meas)
			s := 0.0
			for _, v := range meas {
				s += v
			}
			pows[u] = s / float64(len(meas))
		}
		m, se := meanSE(pows)
		if math.Abs(m-1) > 4*se+0.01 {
			t.Errorf("%v: power after %d samples %.4f ± %.4f, want 1", g, skip, m, 4*se+0.01)
		}
	}
}

// TestZeroAllocs: FillGains, FillTaps and Skip allocate nothing in steady
// state.
func TestZeroAllocs(t *testing.T) {
	for _, cfg := range channelCases() {
		ch, _ := NewChannel(cfg, 1, 0)
		g := make([]float64, 600)
		taps := make([]complex64, 600*ch.NumTaps())
		ch.FillGains(g)
		if a := testing.AllocsPerRun(5, func() { ch.FillGains(g) }); a != 0 {
			t.Errorf("%v f_D=%g: FillGains allocates %v per call", cfg.Generator, cfg.DopplerHz, a)
		}
		if a := testing.AllocsPerRun(5, func() { ch.FillTaps(taps) }); a != 0 {
			t.Errorf("%v f_D=%g: FillTaps allocates %v per call", cfg.Generator, cfg.DopplerHz, a)
		}
		for _, n := range []int{1, 600, 50000} {
			if a := testing.AllocsPerRun(5, func() { ch.Skip(n) }); a != 0 {
				t.Errorf("%v f_D=%g: Skip(%d) allocates %v per call", cfg.Generator, cfg.DopplerHz, n, a)
			}
		}
		if a := testing.AllocsPerRun(5, func() { ch.Skip(50000); ch.FillGains(g) }); a != 0 {
			t.Errorf("%v f_D=%g: FillGains after Skip allocates %v per call", cfg.Generator, cfg.DopplerHz, a)
		}
	}
}

// TestBadInput: bad configurations give a *ParamError naming the field,
// never a panic.
func TestBadInput(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	ok := ChannelConfig{DopplerHz: 55.6, SampleRateHz: 1500, Profile: testProfile}
	mod := func(f func(*ChannelConfig)) ChannelConfig {
		c := ok
		c.Profile.Taps = append([]Tap(nil), ok.Profile.Taps...)
		f(&c)
		return c
	}
	cases := []struct {
		name  string
		cfg   ChannelConfig
		param string
	}{
		{"zero rate", mod(func(c *ChannelConfig) { c.SampleRateHz = 0 }), "SampleRateHz"},
		{"negative rate", mod(func(c *ChannelConfig) { c.SampleRateHz = -1500 }), "SampleRateHz"},
		{"NaN rate", mod(func(c *ChannelConfig) { c.SampleRateHz = nan }), "SampleRateHz"},
		{"Inf rate", mod(func(c *ChannelConfig) { c.SampleRateHz = inf }), "SampleRateHz"},
		{"negative Doppler", mod(func(c *ChannelConfig) { c.DopplerHz = -1 }), "DopplerHz"},
		{"Doppler = fs/2", mod(func(c *ChannelConfig) { c.DopplerHz = 750 }), "DopplerHz"},
		{"Doppler > fs/2", mod(func(c *ChannelConfig) { c.DopplerHz = 1000 }), "DopplerHz"},
		{"NaN Doppler", mod(func(c *ChannelConfig) { c.DopplerHz = nan }), "DopplerHz"},
		{"Inf Doppler", mod(func(c *ChannelConfig) { c.DopplerHz = inf }), "DopplerHz"},
		{"empty taps", mod(func(c *ChannelConfig) { c.Profile.Taps = nil }), "Profile.Taps"},
		{"unsorted taps", mod(func(c *ChannelConfig) { c.Profile.Taps[1].DelayNs = 900 }), "Profile.Taps[2].DelayNs"},
		{"equal delays", mod(func(c *ChannelConfig) { c.Profile.Taps[1].DelayNs = 0 }), "Profile.Taps[1].DelayNs"},
		{"negative delay", mod(func(c *ChannelConfig) { c.Profile.Taps[0].DelayNs = -5 }), "Profile.Taps[0].DelayNs"},
		{"NaN delay", mod(func(c *ChannelConfig) { c.Profile.Taps[1].DelayNs = nan }), "Profile.Taps[1].DelayNs"},
		{"NaN power", mod(func(c *ChannelConfig) { c.Profile.Taps[2].PowerDB = nan }), "Profile.Taps[2].PowerDB"},
		{"Inf power", mod(func(c *ChannelConfig) { c.Profile.Taps[2].PowerDB = -inf }), "Profile.Taps[2].PowerDB"},
		{"too many taps", mod(func(c *ChannelConfig) {
			c.Profile.Taps = nil
			for i := 0; i <= MaxTaps; i++ {
				c.Profile.Taps = append(c.Profile.Taps, Tap{DelayNs: float64(i)})
			}
		}), "Profile.Taps"},
		{"NaN K", mod(func(c *ChannelConfig) { c.LOS, c.RicianKDB = true, nan }), "RicianKDB"},
		{"huge K", mod(func(c *ChannelConfig) { c.LOS, c.RicianKDB = true, 1e6 }), "RicianKDB"},
		{"Inf LOS angle", mod(func(c *ChannelConfig) { c.LOS, c.LOSAngleRad = true, inf }), "LOSAngleRad"},
		{"bad generator", mod(func(c *ChannelConfig) { c.Generator = 7 }), "Generator"},
		{"negative sinusoids", mod(func(c *ChannelConfig) { c.Sinusoids = -1 }), "Sinusoids"},
		{"too many sinusoids", mod(func(c *ChannelConfig) { c.Sinusoids = MaxSinusoids + 1 }), "Sinusoids"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			ch, err := NewChannel(tc.cfg, 1, 0)
			if ch != nil || err == nil {
				t.Fatal("accepted")
			}
			var pe *ParamError
			if !errors.As(err, &pe) || pe.Param != tc.param {
				t.Fatalf("err = %v, want a *ParamError for %s", err, tc.param)
			}
		})
	}
	if _, err := NewShadowing(ShadowingConfig{SigmaDB: 8, DecorrelationM: 50, SpeedMps: 1, SamplePeriodS: 1e-3}, nil); err == nil {
		t.Error("NewShadowing accepted a nil stream")
	}
	for _, sc := range []struct {
		cfg   ShadowingConfig
		param string
	}{
		{ShadowingConfig{SigmaDB: nan, DecorrelationM: 50, SpeedMps: 1, SamplePeriodS: 1e-3}, "SigmaDB"},
		{ShadowingConfig{SigmaDB: -1, DecorrelationM: 50, SpeedMps: 1, SamplePeriodS: 1e-3}, "SigmaDB"},
		{ShadowingConfig{SigmaDB: 8, DecorrelationM: 0, SpeedMps: 1, SamplePeriodS: 1e-3}, "DecorrelationM"},
		{ShadowingConfig{SigmaDB: 8, DecorrelationM: 50, SpeedMps: inf, SamplePeriodS: 1e-3}, "SpeedMps"},
		{ShadowingConfig{SigmaDB: 8, DecorrelationM: 50, SpeedMps: 1, SamplePeriodS: 0}, "SamplePeriodS"},
	} {
		_, err := NewShadowing(sc.cfg, NewStream(1, 0, 0, StreamShadowing))
		var pe *ParamError
		if !errors.As(err, &pe) || pe.Param != sc.param {
			t.Errorf("shadowing %+v: err = %v, want %s", sc.cfg, err, sc.param)
		}
	}
}
