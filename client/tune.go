package client

import (
	"context"
	"errors"
	"io"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// SearchProgressFunc receives the progress events of a Tune or Capacity
// call as they arrive. It runs on the caller's goroutine between receives;
// keep it short.
type SearchProgressFunc func(*pb.SearchProgress)

// Tune asks the server which grid point of req is best for its objective
// over its conditions and returns the recommendation, passing every
// progress event to onProgress (which may be nil). Errors:
// *InvalidInputError for bad input (every field violation); otherwise the
// gRPC status (RESOURCE_EXHAUSTED over the cost bound or when the budget
// cannot pay for the first round, CANCELED when ctx is cancelled,
// UNAVAILABLE when unreachable). The answer is a pure function of req.
func (c *Client) Tune(ctx context.Context, req *pb.TuneRequest, onProgress SearchProgressFunc) (*pb.Recommendation, error) {
	ctx, cancel := c.callContext(ctx)
	defer cancel()
	stream, err := c.simulation.Tune(ctx, req)
	if err != nil {
		return nil, wrapError(err)
	}
	for {
		msg, err := stream.Recv()
		if err == io.EOF {
			return nil, errors.New("Tune: stream ended without a recommendation")
		}
		if err != nil {
			return nil, wrapError(err)
		}
		switch ev := msg.GetEvent().(type) {
		case *pb.TuneResponse_Progress:
			if onProgress != nil {
				onProgress(ev.Progress)
			}
		case *pb.TuneResponse_Recommendation:
			return ev.Recommendation, nil
		}
	}
}

// Capacity asks the server for the largest user count of req's group that
// keeps the outage at or below the limit and returns the result (with the
// analytic pole capacity beside it), passing every progress event to
// onProgress (which may be nil). Errors as for Tune.
func (c *Client) Capacity(ctx context.Context, req *pb.CapacityRequest, onProgress SearchProgressFunc) (*pb.CapacityResult, error) {
	ctx, cancel := c.callContext(ctx)
	defer cancel()
	stream, err := c.simulation.Capacity(ctx, req)
	if err != nil {
		return nil, wrapError(err)
	}
	for {
		msg, err := stream.Recv()
		if err == io.EOF {
			return nil, errors.New("Capacity: stream ended without a result")
		}
		if err != nil {
			return nil, wrapError(err)
		}
		switch ev := msg.GetEvent().(type) {
		case *pb.CapacityResponse_Progress:
			if onProgress != nil {
				onProgress(ev.Progress)
			}
		case *pb.CapacityResponse_Result:
			return ev.Result, nil
		}
	}
}
