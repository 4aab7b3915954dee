package service

import pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"

type simulationServer struct {
	pb.UnimplementedSimulationServiceServer
	s *Server
}
