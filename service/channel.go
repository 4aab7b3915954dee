package service

import (
	"context"
	"errors"
	"fmt"
	"math"
	"regexp"
	"runtime/debug"
	"strings"
	"sync"
	"sync/atomic"
	"time"
	"unsafe"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/fadeloop/fadeloop/fading"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// channelServer implements fadeloop.v1.ChannelService.
type channelServer struct {
	pb.UnimplementedChannelServiceServer
	s *Server
}

// chunkTargetBytes is the default payload of one StreamGains chunk.
const chunkTargetBytes = 512 << 10

// channelConfigFromProto converts a ChannelSpec to fading's ChannelConfig,
// resolving a built-in profile name. Bad input is returned as violations
// with field paths under prefix (e.g. "channel.").
func channelConfigFromProto(m *pb.ChannelSpec, prefix string) (fading.ChannelConfig, []Violation) {
	doppler, vs := dopplerFromProto(m, prefix)
	if len(vs) > 0 {
		return fading.ChannelConfig{}, vs
	}
	cfg := fading.ChannelConfig{
		DopplerHz:    doppler,
		SampleRateHz: m.GetSampleRateHz(),
		RicianKDB:    m.GetRicianKDb(),
		LOS:          m.GetLos(),
		LOSAngleRad:  m.GetLosAngleRad(),
		Sinusoids:    int(m.GetSinusoids()),
	}
	switch m.GetGenerator() {
	case pb.Generator_GENERATOR_DEFAULT:
		cfg.Generator = fading.GeneratorDefault
	case pb.Generator_GENERATOR_SUM_OF_SINUSOIDS:
		cfg.Generator = fading.GeneratorSumOfSinusoids
	case pb.Generator_GENERATOR_SPECTRAL:
		cfg.Generator = fading.GeneratorSpectral
	default:
		return cfg, []Violation{{Field: prefix + "generator", Description: "must be a defined generator other than GENERATOR_UNSPECIFIED"}}
	}
	if taps := m.GetCustomTaps(); len(taps) > 0 {
		cfg.Profile = fading.Profile{Name: "custom", Taps: make([]fading.Tap, len(taps))}
		for i, t := range taps {
			cfg.Profile.Taps[i] = fading.Tap{DelayNs: t.GetDelayNs(), PowerDB: t.GetPowerDb()}
		}
	} else {
		p, err := fading.BuiltinProfile(m.GetProfile())
		if err != nil {
			return cfg, []Violation{{Field: prefix + "profile", Description: paramRule(err)}}
		}
		cfg.Profile = p
	}
	if err := cfg.Validate(); err != nil {
		path := fadingParamPath(err, len(m.GetCustomTaps()) > 0)
		if path == "doppler_hz" && m.GetSpeedKmh() > 0 {
			path = "speed_kmh"
		}
		return cfg, []Violation{{Field: prefix + path, Description: paramRule(err)}}
	}
	return cfg, nil
}

// dopplerFromProto is the spec's maximum Doppler in Hz: doppler_hz, or
// fading.DopplerHz(speed_kmh, carrier_hz) when a speed is given instead.
func dopplerFromProto(m *pb.ChannelSpec, prefix string) (float64, []Violation) {
	if m.GetSpeedKmh() == 0 {
		if m.GetCarrierHz() != 0 {
			return 0, []Violation{{Field: prefix + "carrier_hz", Description: "must be 0 unless speed_kmh is set"}}
		}
		return m.GetDopplerHz(), nil
	}
	if m.GetDopplerHz() != 0 {
		return 0, []Violation{{Field: prefix + "speed_kmh", Description: "must be 0 when doppler_hz is set (give one of them)"}}
	}
	if m.GetCarrierHz() <= 0 {
		return 0, []Violation{{Field: prefix + "carrier_hz", Description: "must be > 0 with speed_kmh"}}
	}
	return fading.DopplerHz(m.GetSpeedKmh(), m.GetCarrierHz()), nil
}

var tapsParam = regexp.MustCompile(`^Profile\.Taps\[(\d+)\]\.(DelayNs|PowerDB)$`)

// fadingParamPath maps the Go parameter name of a fading *ParamError to the
// ChannelSpec field path.
func fadingParamPath(err error, custom bool) string {
	var pe *fading.ParamError
	if !errors.As(err, &pe) {
		return "profile"
	}
	if m := tapsParam.FindStringSubmatch(pe.Param); m != nil {
		f := "delay_ns"
		if m[2] == "PowerDB" {
			f = "power_db"
		}
		return "custom_taps[" + m[1] + "]." + f
	}
	switch pe.Param {
	case "DopplerHz":
		return "doppler_hz"
	case "SampleRateHz":
		return "sample_rate_hz"
	case "RicianKDB":
		return "rician_k_db"
	case "LOSAngleRad":
		return "los_angle_rad"
	case "Generator":
		return "generator"
	case "Sinusoids":
		return "sinusoids"
	}
	if strings.HasPrefix(pe.Param, "Profile") {
		if custom {
			return "custom_taps"
		}
		return "profile"
	}
	return strings.ToLower(pe.Param)
}

// paramRule returns the rule text of a fading *ParamError (or the error).
func paramRule(err error) string {
	var pe *fading.ParamError
	if errors.As(err, &pe) {
		return pe.Rule
	}
	return err.Error()
}

// isLittleEndian reports the byte order of this machine: complex64 values
// are sent as their in-memory bytes on little-endian machines.
var isLittleEndian = func() bool {
	x := uint16(1)
	return *(*byte)(unsafe.Pointer(&x)) == 1
}()

// gainChunk is one StreamGains chunk buffer.
type gainChunk struct {
	samples []complex64 // links·n·taps values, [link][sample][tap]
	bytes   []byte      // the wire form (aliases samples on little-endian machines)
	n       int         // samples per link in the chunk
	offset  int64
	index   int64
}

// StreamGains streams K links' complex tap gains in chunks.
func (c *channelServer) StreamGains(req *pb.StreamGainsRequest, stream pb.ChannelService_StreamGainsServer) error {
	s := c.s
	ctx := stream.Context()
	vs := s.validator.check(req, "")
	var cfg fading.ChannelConfig
	if req.GetChannel() != nil {
		var cvs []Violation
		cfg, cvs = channelConfigFromProto(req.GetChannel(), "channel.")
		if len(vs) == 0 {
			vs = append(vs, cvs...)
		} else {
			vs = mergeViolations(vs, cvs)
		}
	}
	if len(vs) > 0 {
		return s.reject(vs)
	}
	links := int(req.GetLinks())
	taps := len(cfg.Profile.Taps)
	total := req.GetSamples()
	perSample := 8 * links * taps // bytes per sample index over all links
	maxPayload := s.cfg.MaxSendMessageBytes - 1024
	if perSample > maxPayload {
		return s.reject([]Violation{{Field: "links", Description: fmt.Sprintf(
			"links × taps × 8 bytes = %d bytes per sample exceeds the server's maximum message size %d bytes",
			perSample, s.cfg.MaxSendMessageBytes)}})
	}
	chunk := int(req.GetChunkSamples())
	if chunk == 0 {
		chunk = max(1, chunkTargetBytes/perSample)
	}
	chunk = min(chunk, maxPayload/perSample)
	if int64(chunk) > total {
		chunk = int(total)
	}
	cost := satMul(satMul(int64(links), total), int64(taps))
	release, err := s.admit(ctx, "StreamGains", cost)
	if err != nil {
		return err
	}
	defer release()
	s.hook(ctx, "StreamGains")

	chans := make([]*fading.Channel, links)
	for k := range chans {
		ch, err := fading.NewChannel(cfg, req.GetSeed(), k)
		if err != nil {
			return s.reject([]Violation{{Field: "channel." + fadingParamPath(err, len(req.GetChannel().GetCustomTaps()) > 0), Description: paramRule(err)}})
		}
		chans[k] = ch
	}

	// A producer fills chunk buffers (links split over workers) while the
	// handler sends the previous one; three buffers circulate.
	const nbuf = 3
	free := make(chan *gainChunk, nbuf)
	ready := make(chan *gainChunk, nbuf)
	for range nbuf {
		b := &gainChunk{samples: make([]complex64, chunk*links*taps)}
		if isLittleEndian {
			b.bytes = unsafe.Slice((*byte)(unsafe.Pointer(&b.samples[0])), len(b.samples)*8)
		} else {
			b.bytes = make([]byte, len(b.samples)*8)
		}
		free <- b
	}
	genCtx, cancel := context.WithCancel(ctx)
	defer cancel()
	workers := min(s.cfg.EngineParallelism, links)
	prod := goSafe(s.cfg.Logger, ctx, func() error {
		defer close(ready)
		var off, idx int64
		for off < total {
			var b *gainChunk
			select {
			case b = <-free:
			case <-genCtx.Done():
				return genCtx.Err()
			}
			n := int(min(int64(chunk), total-off))
			fillGains(chans, b.samples, n, taps, workers)
			s.gainsFilled.Add(int64(n))
			if !isLittleEndian {
				encodeLE(b.bytes, b.samples[:n*links*taps])
			}
			b.n, b.offset, b.index = n, off, idx
			off += int64(n)
			idx++
			select {
			case ready <- b:
			case <-genCtx.Done():
				return genCtx.Err()
			}
		}
		return nil
	})
	var sent int64
	resp := &pb.StreamGainsResponse{Links: int32(links), Taps: int32(taps)}
	// A client that stops reading blocks Send once flow control is
	// exhausted; after StreamIdleTimeout the stream is cut (see endStream).
	idleTimeout := s.cfg.StreamIdleTimeout
	idle := time.AfterFunc(idleTimeout, func() {
		endStream(ctx, status.Errorf(codes.DeadlineExceeded,
			"the client took no StreamGains chunk for %s (stream_idle_timeout); stream closed", idleTimeout))
	})
	idle.Stop()
	defer idle.Stop()
	for b := range ready {
		resp.ChunkIndex = b.index
		resp.SampleOffset = b.offset
		resp.Samples = int32(b.n)
		resp.Gains = b.bytes[:b.n*perSample]
		idle.Reset(idleTimeout)
		err := stream.Send(resp)
		idle.Stop()
		if err != nil {
			cancel()
			for range ready {
			}
			<-prod
			return statusFromError(ctx, err)
		}
		sent += int64(b.n) * int64(links) * int64(taps)
		s.metrics.gainSamples.Add(float64(int64(b.n) * int64(links) * int64(taps)))
		free <- b
	}
	if err := <-prod; err != nil {
		return statusFromError(ctx, err)
	}
	return nil
}

// fillGains writes n samples of every link into dst ([link][sample][tap]),
// splitting the links over workers goroutines. A panic in a worker is
// re-raised in the caller (whose goroutine recovers it into INTERNAL), so
// that it cannot kill the server.
func fillGains(chans []*fading.Channel, dst []complex64, n, taps, workers int) {
	per := n * taps
	if workers <= 1 || len(chans) == 1 {
		for k, ch := range chans {
			ch.FillTaps(dst[k*per : (k+1)*per])
		}
		return
	}
	var wg sync.WaitGroup
	var panicked atomic.Pointer[workerPanic]
	for w := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			defer func() {
				if p := recover(); p != nil {
					panicked.CompareAndSwap(nil, &workerPanic{value: p, stack: debug.Stack()})
				}
			}()
			for k := w; k < len(chans); k += workers {
				chans[k].FillTaps(dst[k*per : (k+1)*per])
			}
		}()
	}
	wg.Wait()
	if p := panicked.Load(); p != nil {
		panic(p)
	}
}

// workerPanic carries a worker goroutine's panic and stack to the goroutine
// that started it.
type workerPanic struct {
	value any
	stack []byte
}

func (p *workerPanic) Error() string {
	return fmt.Sprintf("%v (in a worker goroutine:\n%s)", p.value, p.stack)
}

// encodeLE writes x as little-endian float32 pairs (big-endian machines).
func encodeLE(dst []byte, x []complex64) {
	for i, v := range x {
		putF32(dst[8*i:], real(v))
		putF32(dst[8*i+4:], imag(v))
	}
}

func putF32(b []byte, f float32) {
	u := *(*uint32)(unsafe.Pointer(&f))
	b[0], b[1], b[2], b[3] = byte(u), byte(u>>8), byte(u>>16), byte(u>>24)
}

// satMul multiplies non-negative a and b, saturating at MaxInt64.
func satMul(a, b int64) int64 {
	if a <= 0 || b <= 0 {
		return 0
	}
	if a > (1<<63-1)/b {
		return 1<<63 - 1
	}
	return a * b
}

// mergeViolations appends the semantic violations whose field is not
// already named by a proto-rule violation.
func mergeViolations(protoVs, semVs []Violation) []Violation {
	seen := make(map[string]bool, len(protoVs))
	for _, v := range protoVs {
		seen[v.Field] = true
	}
	out := protoVs
	for _, v := range semVs {
		if !seen[v.Field] {
			out = append(out, v)
		}
	}
	return out
}

// checkCost estimates the work of a self-check in tap-samples: links ×
// record samples × branches (up to 4 for the MRC lines), twice when deep
// fades need a second pass at f_D·T = 0.002.
func checkCost(cfg fading.CheckConfig) int64 {
	links := cfg.Links
	if links == 0 {
		links = fading.DefaultCheckLinks
	}
	periods := cfg.DopplerPeriods
	if periods == 0 {
		periods = fading.DefaultCheckPeriods
	}
	per := float64(1 << 20)
	if fdT := cfg.Channel.DopplerHz / cfg.Channel.SampleRateHz; fdT > 0 {
		per = math.Min(per, periods/fdT)
	}
	taps := max(len(cfg.Channel.Profile.Taps), 4)
	x := 2 * float64(links) * per * float64(taps)
	if x >= math.MaxInt64 {
		return math.MaxInt64
	}
	return int64(x)
}

// CheckChannel runs fading's statistical self-check.
func (c *channelServer) CheckChannel(ctx context.Context, req *pb.CheckChannelRequest) (*pb.CheckChannelResponse, error) {
	s := c.s
	vs := s.validator.check(req, "")
	var ch fading.ChannelConfig
	if req.GetChannel() != nil {
		var cvs []Violation
		ch, cvs = channelConfigFromProto(req.GetChannel(), "channel.")
		vs = mergeViolations(vs, cvs)
	}
	if len(vs) > 0 {
		return nil, s.reject(vs)
	}
	cfg := fading.CheckConfig{
		Channel:        ch,
		Links:          int(req.GetLinks()),
		DopplerPeriods: req.GetDopplerPeriods(),
		Seed:           req.GetSeed(),
		Sigmas:         req.GetSigmas(),
	}
	if err := cfg.Validate(); err != nil {
		return nil, s.reject([]Violation{{Field: checkParamPath(err, len(req.GetChannel().GetCustomTaps()) > 0), Description: paramRule(err)}})
	}
	release, err := s.admit(ctx, "CheckChannel", checkCost(cfg))
	if err != nil {
		return nil, err
	}
	defer release()
	s.hook(ctx, "CheckChannel")
	rep, err := fading.Check(ctx, cfg)
	if err != nil {
		var pe *fading.ParamError
		if errors.As(err, &pe) {
			return nil, s.reject([]Violation{{Field: checkParamPath(err, len(req.GetChannel().GetCustomTaps()) > 0), Description: pe.Rule}})
		}
		return nil, statusFromError(ctx, err)
	}
	out := &pb.CheckChannelResponse{Pass: rep.Pass, Links: i32(rep.Links), DopplerPeriods: rep.DopplerPeriods}
	for _, l := range rep.Lines {
		out.Lines = append(out.Lines, &pb.CheckLine{
			Name: l.Name, Measured: l.Measured, Theory: l.Theory, Tolerance: l.Tolerance, Pass: l.Pass,
			Unit: l.Unit, Kind: l.Kind, Arg: l.Arg, Branches: i32(l.Branches), FdT: l.FdT, Periods: l.Periods,
		})
	}
	return out, nil
}

// checkParamPath maps a CheckConfig *ParamError to the request field path.
func checkParamPath(err error, custom bool) string {
	var pe *fading.ParamError
	if !errors.As(err, &pe) {
		return "channel"
	}
	switch {
	case strings.HasPrefix(pe.Param, "Channel."):
		return "channel." + fadingParamPath(&fading.ParamError{Param: strings.TrimPrefix(pe.Param, "Channel."), Rule: pe.Rule}, custom)
	case pe.Param == "Links":
		return "links"
	case pe.Param == "DopplerPeriods":
		return "doppler_periods"
	case pe.Param == "Sigmas":
		return "sigmas"
	}
	return strings.ToLower(pe.Param)
}
