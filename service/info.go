package service

import (
	"context"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/multicell"
	"github.com/fadeloop/fadeloop/loop/tune"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// apiVersion is the proto package this server implements.
const apiVersion = "fadeloop.v1"

// infoServer implements fadeloop.v1.InfoService: the server's versions,
// limits and built-in profiles, read from the packages that own them.
type infoServer struct {
	pb.UnimplementedInfoServiceServer
	s *Server
}

// GetServerInfo answers from constants and the server's Config; it takes
// no run slot.
func (h *infoServer) GetServerInfo(ctx context.Context, _ *pb.GetServerInfoRequest) (*pb.GetServerInfoResponse, error) {
	cfg := h.s.cfg
	resp := &pb.GetServerInfoResponse{
		EngineVersion:          loop.EngineVersion,
		MulticellEngineVersion: multicell.EngineVersion,
		ApiVersion:             apiVersion,
		Limits: &pb.ServerLimits{
			MaxUsers:            loop.MaxUsers,
			MaxGroups:           loop.MaxGroups,
			MaxGridPoints:       tune.MaxGridPoints,
			MaxAxisValues:       tune.MaxAxisValues,
			MaxTracedUsers:      maxTraceUsers,
			MaxRecvMessageBytes: int64(cfg.MaxRecvMessageBytes),
			MaxSendMessageBytes: int64(cfg.MaxSendMessageBytes),
			MaxCostTapSlots:     cfg.MaxCost,
			MaxSlots:            loop.MaxSlots,
		},
	}
	for _, name := range fading.BuiltinProfileNames() {
		p, err := fading.BuiltinProfile(name)
		if err != nil {
			return nil, err
		}
		bp := &pb.BuiltinProfile{Name: p.Name}
		for _, t := range p.Taps {
			bp.Taps = append(bp.Taps, &pb.ProfileTap{DelayNs: t.DelayNs, PowerDb: t.PowerDB})
		}
		resp.Profiles = append(resp.Profiles, bp)
	}
	return resp, nil
}
