package service

import (
	"github.com/fadeloop/fadeloop/loop/tune"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// SweepPointToProto converts one computed sweep point as the Sweep RPC
// sends it (without detailed: only the aggregate, feasibility and run
// counts of its report), for callers that compute points elsewhere (the
// durable job queue) and must show them exactly as the direct path does.
func SweepPointToProto(p *tune.SweepPoint, detailed bool) *pb.SweepPoint {
	return sweepPointToProto(p, detailed)
}
