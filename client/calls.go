package client

import (
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"iter"
	"math"

	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// ProgressFunc receives the progress events of a long call as they arrive.
// It runs on the caller's goroutine between receives; keep it short.
type ProgressFunc func(*pb.Progress)

// Simulate runs one scenario and returns its report, passing every progress
// event to onProgress (which may be nil). Errors: *InvalidInputError for bad
// input; otherwise the gRPC status (RESOURCE_EXHAUSTED over the cost bound,
// CANCELED when ctx is cancelled, UNAVAILABLE when unreachable).
func (c *Client) Simulate(ctx context.Context, req *pb.SimulateRequest, onProgress ProgressFunc) (*pb.RunReport, error) {
	ctx, cancel := c.callContext(ctx)
	defer cancel()
	stream, err := c.simulation.Simulate(ctx, req)
	if err != nil {
		return nil, wrapError(err)
	}
	for {
		msg, err := stream.Recv()
		if err == io.EOF {
			return nil, errors.New("Simulate: stream ended without a report")
		}
		if err != nil {
			return nil, wrapError(err)
		}
		switch ev := msg.GetEvent().(type) {
		case *pb.SimulateResponse_Progress:
			if onProgress != nil {
				onProgress(ev.Progress)
			}
		case *pb.SimulateResponse_Report:
			return ev.Report, nil
		}
	}
}

// SweepCall is a running sweep: range over Points for the grid points as
// they finish (completion order, each tagged with its grid index), then
// read Summary.
type SweepCall struct {
	c       *Client
	ctx     context.Context
	req     *pb.SweepRequest
	summary *pb.SweepSummary
	used    bool
}

// Sweep starts a sweep. Nothing is sent until Points is ranged over.
func (c *Client) Sweep(ctx context.Context, req *pb.SweepRequest) *SweepCall {
	return &SweepCall{c: c, ctx: ctx, req: req}
}

// Points yields each finished grid point. On failure it yields one
// (nil, error) pair and stops; breaking out of the loop cancels the call.
// A SweepCall can be ranged over once.
func (s *SweepCall) Points() iter.Seq2[*pb.SweepPoint, error] {
	return func(yield func(*pb.SweepPoint, error) bool) {
		if s.used {
			yield(nil, errors.New("Sweep: Points ranged over twice"))
			return
		}
		s.used = true
		ctx, cancel := s.c.callContext(s.ctx)
		defer cancel()
		stream, err := s.c.simulation.Sweep(ctx, s.req)
		if err != nil {
			yield(nil, wrapError(err))
			return
		}
		for {
			msg, err := stream.Recv()
			if err == io.EOF {
				if s.summary == nil {
					yield(nil, errors.New("Sweep: stream ended without a summary"))
				}
				return
			}
			if err != nil {
				yield(nil, wrapError(err))
				return
			}
			switch ev := msg.GetEvent().(type) {
			case *pb.SweepResponse_Point:
				if !yield(ev.Point, nil) {
					return
				}
			case *pb.SweepResponse_Summary:
				s.summary = ev.Summary
			}
		}
	}
}

// Summary is the sweep's closing summary, nil until Points has finished
// without error.
func (s *SweepCall) Summary() *pb.SweepSummary { return s.summary }

// GainsChunk is one chunk of StreamGains: samples [SampleOffset,
// SampleOffset+Samples) of every link, decoded to complex64.
type GainsChunk struct {
	ChunkIndex   int64
	SampleOffset int64
	Samples      int
	Links        int
	Taps         int
	// Gains holds the complex tap gains laid out [link][sample][tap]:
	// Gains[(k*Samples+s)*Taps+l].
	Gains []complex64
}

// At returns the gain of link k, chunk sample s (0-based within the chunk)
// and tap l.
func (g *GainsChunk) At(k, s, l int) complex64 { return g.Gains[(k*g.Samples+s)*g.Taps+l] }

// DecodeGains decodes a StreamGainsResponse's packed float32 pairs.
func DecodeGains(m *pb.StreamGainsResponse) (*GainsChunk, error) {
	n := int(m.GetLinks()) * int(m.GetSamples()) * int(m.GetTaps())
	if n < 0 || len(m.GetGains()) != 8*n {
		return nil, fmt.Errorf("StreamGains chunk %d: %d bytes of gains, want 8·links·samples·taps = %d",
			m.GetChunkIndex(), len(m.GetGains()), 8*n)
	}
	g := &GainsChunk{
		ChunkIndex: m.GetChunkIndex(), SampleOffset: m.GetSampleOffset(),
		Samples: int(m.GetSamples()), Links: int(m.GetLinks()), Taps: int(m.GetTaps()),
		Gains: make([]complex64, n),
	}
	b := m.GetGains()
	for i := range g.Gains {
		re := math.Float32frombits(binary.LittleEndian.Uint32(b[8*i:]))
		im := math.Float32frombits(binary.LittleEndian.Uint32(b[8*i+4:]))
		g.Gains[i] = complex(re, im)
	}
	return g, nil
}

// StreamGains yields the chunks of complex tap gains of req's links as they
// arrive. On failure it yields one (nil, error) pair and stops; breaking out
// of the loop cancels the call.
func (c *Client) StreamGains(ctx context.Context, req *pb.StreamGainsRequest) iter.Seq2[*GainsChunk, error] {
	return func(yield func(*GainsChunk, error) bool) {
		ctx, cancel := c.callContext(ctx)
		defer cancel()
		stream, err := c.channel.StreamGains(ctx, req)
		if err != nil {
			yield(nil, wrapError(err))
			return
		}
		for {
			msg, err := stream.Recv()
			if err == io.EOF {
				return
			}
			if err != nil {
				yield(nil, wrapError(err))
				return
			}
			chunk, err := DecodeGains(msg)
			if !yield(chunk, err) || err != nil {
				return
			}
		}
	}
}

// CheckChannel runs the statistical self-check of a channel configuration.
func (c *Client) CheckChannel(ctx context.Context, req *pb.CheckChannelRequest) (*pb.CheckChannelResponse, error) {
	ctx, cancel := c.callContext(ctx)
	defer cancel()
	resp, err := c.channel.CheckChannel(ctx, req)
	return resp, wrapError(err)
}

// Health asks the server's grpc.health.v1 service for the overall status
// ("SERVING", "NOT_SERVING" while draining, ...).
func (c *Client) Health(ctx context.Context) (string, error) {
	ctx, cancel := c.callContext(ctx)
	defer cancel()
	resp, err := healthpb.NewHealthClient(c.conn).Check(ctx, &healthpb.HealthCheckRequest{})
	if err != nil {
		return "", wrapError(err)
	}
	return resp.GetStatus().String(), nil
}
