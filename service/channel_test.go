package service

import (
	"bytes"
	"context"
	"encoding/binary"
	"math"
	"testing"

	"google.golang.org/grpc/codes"

	"github.com/fadeloop/fadeloop/fading"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

func eva(dopplerHz float64) *pb.ChannelSpec {
	return &pb.ChannelSpec{
		DopplerHz:    dopplerHz,
		SampleRateHz: 1500,
		Profile:      "EVA",
		Generator:    pb.Generator_GENERATOR_DEFAULT,
	}
}

// collectGains reads a StreamGains stream and returns the concatenated
// per-link traces as complex64, [link][sample][tap], checking the chunk
// headers on the way.
func collectGains(t *testing.T, env *testEnv, req *pb.StreamGainsRequest) ([][]complex64, int) {
	t.Helper()
	st, err := env.channel.StreamGains(context.Background(), req)
	if err != nil {
		t.Fatal(err)
	}
	msgs, err := drain(st.Recv)
	if err != nil {
		t.Fatalf("StreamGains: %v", err)
	}
	links := int(req.GetLinks())
	out := make([][]complex64, links)
	var off int64
	taps := 0
	for i, m := range msgs {
		if m.GetChunkIndex() != int64(i) || m.GetSampleOffset() != off {
			t.Fatalf("chunk %d: index %d offset %d, want %d %d", i, m.GetChunkIndex(), m.GetSampleOffset(), i, off)
		}
		taps = int(m.GetTaps())
		n := int(m.GetSamples())
		if int(m.GetLinks()) != links || len(m.GetGains()) != 8*links*n*taps {
			t.Fatalf("chunk %d: links %d, %d bytes for %d samples × %d taps", i, m.GetLinks(), len(m.GetGains()), n, taps)
		}
		g := m.GetGains()
		for k := range links {
			for j := range n * taps {
				p := 8 * (k*n*taps + j)
				re := math.Float32frombits(binary.LittleEndian.Uint32(g[p:]))
				im := math.Float32frombits(binary.LittleEndian.Uint32(g[p+4:]))
				out[k] = append(out[k], complex(re, im))
			}
		}
		off += int64(n)
	}
	if off != req.GetSamples() {
		t.Fatalf("got %d samples per link, want %d", off, req.GetSamples())
	}
	return out, taps
}

func TestStreamGainsMatchesEngineInAnyChunking(t *testing.T) {
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{})
			const links, samples, seed = 3, 1000, 42
			base := &pb.StreamGainsRequest{Channel: eva(55.6), Links: links, Samples: samples, Seed: seed}
			whole, taps := collectGains(t, env, base)
			if taps != 9 {
				t.Fatalf("EVA has 9 taps, stream says %d", taps)
			}
			small := &pb.StreamGainsRequest{Channel: eva(55.6), Links: links, Samples: samples, Seed: seed, ChunkSamples: 7}
			chunked, _ := collectGains(t, env, small)
			// The engine itself, link k seeded with (seed, user k).
			prof, err := fading.BuiltinProfile("EVA")
			if err != nil {
				t.Fatal(err)
			}
			for k := range links {
				ch, err := fading.NewChannel(fading.ChannelConfig{DopplerHz: 55.6, SampleRateHz: 1500, Profile: prof}, seed, k)
				if err != nil {
					t.Fatal(err)
				}
				want := make([]complex64, samples*taps)
				ch.FillTaps(want)
				for i := range want {
					if whole[k][i] != want[i] || chunked[k][i] != want[i] {
						t.Fatalf("link %d value %d: stream %v, chunked %v, engine %v", k, i, whole[k][i], chunked[k][i], want[i])
					}
				}
			}
			// Links differ from each other (independent streams).
			if whole[0][0] == whole[1][0] {
				t.Errorf("links 0 and 1 start with the same gain %v", whole[0][0])
			}
		})
	}
}

func TestStreamGainsSameSeedSameBytes(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	get := func(seed uint64) []byte {
		st, err := env.channel.StreamGains(context.Background(), &pb.StreamGainsRequest{
			Channel: &pb.ChannelSpec{DopplerHz: 10, SampleRateHz: 1000, CustomTaps: []*pb.Tap{{DelayNs: 0}, {DelayNs: 100, PowerDb: -3}},
				Generator: pb.Generator_GENERATOR_SPECTRAL},
			Links: 2, Samples: 3000, Seed: seed, ChunkSamples: 1000})
		if err != nil {
			t.Fatal(err)
		}
		msgs, err := drain(st.Recv)
		if err != nil {
			t.Fatal(err)
		}
		var b []byte
		for _, m := range msgs {
			b = append(b, m.GetGains()...)
		}
		return b
	}
	a, b, c := get(5), get(5), get(6)
	if !bytes.Equal(a, b) {
		t.Error("same seed gave different bytes")
	}
	if bytes.Equal(a, c) {
		t.Error("different seeds gave the same bytes")
	}
}

func TestStreamGainsBadInput(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{MaxCost: 1e6})
	cases := []struct {
		name  string
		req   *pb.StreamGainsRequest
		code  codes.Code
		field string
	}{
		{"generator unspecified", &pb.StreamGainsRequest{Channel: &pb.ChannelSpec{SampleRateHz: 1500, Profile: "EVA"}, Links: 1, Samples: 10},
			codes.InvalidArgument, "channel.generator"},
		{"empty taps and no profile", &pb.StreamGainsRequest{Channel: &pb.ChannelSpec{SampleRateHz: 1500, Generator: pb.Generator_GENERATOR_DEFAULT}, Links: 1, Samples: 10},
			codes.InvalidArgument, "channel"},
		{"doppler above half the sample rate", &pb.StreamGainsRequest{Channel: eva(800), Links: 1, Samples: 10},
			codes.InvalidArgument, "channel.doppler_hz"},
		{"doppler at exactly half the sample rate", &pb.StreamGainsRequest{Channel: eva(750), Links: 1, Samples: 10},
			codes.InvalidArgument, "channel.doppler_hz"},
		{"unknown profile", &pb.StreamGainsRequest{Channel: &pb.ChannelSpec{SampleRateHz: 1500, Profile: "NOPE", Generator: pb.Generator_GENERATOR_DEFAULT}, Links: 1, Samples: 10},
			codes.InvalidArgument, "channel.profile"},
		{"taps not ascending", &pb.StreamGainsRequest{Channel: &pb.ChannelSpec{SampleRateHz: 1500, Generator: pb.Generator_GENERATOR_DEFAULT,
			CustomTaps: []*pb.Tap{{DelayNs: 100}, {DelayNs: 50}}}, Links: 1, Samples: 10},
			codes.InvalidArgument, "channel.custom_taps[1].delay_ns"},
		{"negative doppler", &pb.StreamGainsRequest{Channel: eva(-1), Links: 1, Samples: 10},
			codes.InvalidArgument, "channel.doppler_hz"},
		{"zero links", &pb.StreamGainsRequest{Channel: eva(10), Links: 0, Samples: 10},
			codes.InvalidArgument, "links"},
		{"zero samples", &pb.StreamGainsRequest{Channel: eva(10), Links: 1, Samples: 0},
			codes.InvalidArgument, "samples"},
		{"missing channel", &pb.StreamGainsRequest{Links: 1, Samples: 10},
			codes.InvalidArgument, "channel"},
		{"cost over the bound", &pb.StreamGainsRequest{Channel: eva(10), Links: 100, Samples: 10000},
			codes.ResourceExhausted, ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			st, err := env.channel.StreamGains(context.Background(), c.req)
			if err == nil {
				_, err = st.Recv()
			}
			if c.code == codes.InvalidArgument {
				wantInvalid(t, err, c.field)
				return
			}
			s := wantCode(t, err, c.code)
			if !bytes.Contains([]byte(s.Message()), []byte("max_cost")) {
				t.Errorf("message %q does not name the bound max_cost", s.Message())
			}
		})
	}
}

// TestStreamGainsCancelPrompt checks that a cancelled StreamGains stops
// generating and frees its run slot. Promptness is asserted by work, not
// wall time (so the test holds on a busy machine): the samples generated
// after the cancel are at most what the pipeline can hold — the chunks in
// flight within the HTTP/2 window (4 MiB) plus the three chunk buffers and
// the one being filled — out of 10^7 requested; and once the slot is free
// nothing more is generated.
func TestStreamGainsCancelPrompt(t *testing.T) {
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{MaxConcurrentRuns: 1, QueueLength: -1})
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			req := &pb.StreamGainsRequest{Channel: eva(55.6), Links: 64, Samples: 1e7}
			st, err := env.channel.StreamGains(ctx, req)
			if err != nil {
				t.Fatal(err)
			}
			first, err := st.Recv()
			if err != nil {
				t.Fatal(err)
			}
			atCancel := env.srv.gainsFilled.Load()
			cancel()
			eventually(t, "run slot freed after the cancel", func() bool { return slotsFree(env) })
			after := env.srv.gainsFilled.Load() - atCancel
			chunk := int64(first.GetSamples())
			perChunk := int64(len(first.GetGains()))
			bound := ((4<<20)/perChunk + 1 + 4) * chunk
			t.Logf("%d samples per link generated after the cancel (bound %d, chunk %d, requested %d)", after, bound, chunk, req.GetSamples())
			if after > bound {
				t.Errorf("%d samples per link generated after the cancel, want <= %d", after, bound)
			}
			if err := callGains(context.Background(), env.channel, smallGains()); err != nil {
				t.Fatalf("call after the cancel: %v", err)
			}
			if got := env.srv.gainsFilled.Load() - atCancel - after; got != smallGains().GetSamples() {
				t.Errorf("generation went on after the slot was freed: %d extra samples", got-smallGains().GetSamples())
			}
		})
	}
}

func TestCheckChannel(t *testing.T) {
	for _, tr := range transports {
		t.Run(string(tr), func(t *testing.T) {
			env := startEnv(t, tr, Config{})
			req := &pb.CheckChannelRequest{
				Channel: &pb.ChannelSpec{DopplerHz: 50, SampleRateHz: 1500, Profile: "FLAT", Generator: pb.Generator_GENERATOR_DEFAULT},
				Links:   16, DopplerPeriods: 40, Seed: 11,
			}
			resp, err := env.channel.CheckChannel(context.Background(), req)
			if err != nil {
				t.Fatal(err)
			}
			// The service must pass the engine's own report through: the
			// same request to fading.Check gives the same lines.
			want, err := fading.Check(context.Background(), fading.CheckConfig{
				Channel: fading.ChannelConfig{DopplerHz: 50, SampleRateHz: 1500, Profile: fading.Profile{Name: "FLAT", Taps: []fading.Tap{{}}}},
				Links:   16, DopplerPeriods: 40, Seed: 11})
			if err != nil {
				t.Fatal(err)
			}
			if len(resp.GetLines()) == 0 || len(resp.GetLines()) != len(want.Lines) || resp.GetPass() != want.Pass ||
				resp.GetLinks() != 16 {
				t.Fatalf("CheckChannel: %d lines pass=%v links=%d; engine %d lines pass=%v",
					len(resp.GetLines()), resp.GetPass(), resp.GetLinks(), len(want.Lines), want.Pass)
			}
			for i, l := range resp.GetLines() {
				w := want.Lines[i]
				if l.GetName() != w.Name || l.GetMeasured() != w.Measured || l.GetTheory() != w.Theory ||
					l.GetTolerance() != w.Tolerance || l.GetPass() != w.Pass || l.GetKind() != w.Kind {
					t.Errorf("line %d: %v, engine %+v", i, l, w)
				}
			}
		})
	}
}

func TestCheckChannelBadInput(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{MaxCost: 1e7})
	ok := func() *pb.ChannelSpec {
		return &pb.ChannelSpec{DopplerHz: 50, SampleRateHz: 1500, Profile: "FLAT", Generator: pb.Generator_GENERATOR_DEFAULT}
	}
	cases := []struct {
		name  string
		req   *pb.CheckChannelRequest
		code  codes.Code
		field string
	}{
		{"too few links", &pb.CheckChannelRequest{Channel: ok(), Links: 5}, codes.InvalidArgument, "links"},
		{"too short", &pb.CheckChannelRequest{Channel: ok(), DopplerPeriods: 10}, codes.InvalidArgument, "doppler_periods"},
		{"sigmas", &pb.CheckChannelRequest{Channel: ok(), Sigmas: 20}, codes.InvalidArgument, "sigmas"},
		{"doppler above half", &pb.CheckChannelRequest{Channel: eva(760)}, codes.InvalidArgument, "channel.doppler_hz"},
		{"generator unspecified", &pb.CheckChannelRequest{Channel: &pb.ChannelSpec{DopplerHz: 50, SampleRateHz: 1500, Profile: "FLAT"}},
			codes.InvalidArgument, "channel.generator"},
		{"no channel", &pb.CheckChannelRequest{}, codes.InvalidArgument, "channel"},
		{"cost over the bound", &pb.CheckChannelRequest{Channel: ok(), Links: 4096, DopplerPeriods: 20000}, codes.ResourceExhausted, ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := env.channel.CheckChannel(context.Background(), c.req)
			if c.code == codes.InvalidArgument {
				wantInvalid(t, err, c.field)
				return
			}
			wantCode(t, err, c.code)
		})
	}
}
