package service

import (
	"context"
	"errors"
	"fmt"
	"net"
	"net/http"
	"sync"
	"sync/atomic"
	"time"

	"github.com/grpc-ecosystem/go-grpc-middleware/v2/interceptors/recovery"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/keepalive"
	"google.golang.org/grpc/reflection"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// Server is a fadeloop gRPC server: ChannelService, SimulationService and
// LoopService with validation, cost bound, admission control, logging,
// panic recovery and metrics, plus grpc.health.v1 and server reflection
// (unless Config.DisableReflection). Optional bearer-token authentication
// (Config.AuthToken) covers every service but health.
//
// Typical use, in a daemon or in-process (the CLI's embedded mode):
//
//	srv, err := service.NewServer(service.Config{})
//	lis, _ := net.Listen("tcp", "127.0.0.1:0")
//	go srv.Serve(lis)
//	defer srv.Shutdown(ctx) // drain: health NOT_SERVING, finish calls, stop
type Server struct {
	cfg       Config
	grpc      *grpc.Server
	health    *health.Server
	metrics   *metrics
	runs      *admission
	lockstep  *limiter
	perClient *clientShare
	validator *protoValidator
	draining  atomic.Bool
	drained   chan struct{} // closed when health watchers should end
	drainOnce sync.Once
	// drainCtx ends when drained closes: open Lockstep streams end then
	// (UNAVAILABLE), so that an idle one does not hold the shutdown open.
	drainCtx    context.Context
	drainCancel context.CancelFunc
	// gainsFilled counts StreamGains samples per link generated (tests
	// measure the work done after a cancel with it).
	gainsFilled atomic.Int64
}

// healthService is grpc's health server whose Watch streams end when the
// server drains (after reporting NOT_SERVING), so that they do not hold a
// graceful stop open.
type healthService struct {
	*health.Server
	drained <-chan struct{}
}

func (h *healthService) Watch(req *healthpb.HealthCheckRequest, stream healthpb.Health_WatchServer) error {
	ctx, cancel := context.WithCancel(stream.Context())
	defer cancel()
	go func() {
		select {
		case <-h.drained:
			// Let the NOT_SERVING update reach the watcher first.
			time.Sleep(50 * time.Millisecond)
			cancel()
		case <-ctx.Done():
		}
	}()
	return h.Server.Watch(req, &healthWatchStream{Health_WatchServer: stream, ctx: ctx})
}

type healthWatchStream struct {
	healthpb.Health_WatchServer
	ctx context.Context
}

func (s *healthWatchStream) Context() context.Context { return s.ctx }

// NewServer builds a Server from cfg (zero fields take their defaults; see
// Config). It registers every service but listens on nothing: call Serve.
func NewServer(cfg Config) (*Server, error) {
	cfg, err := cfg.withDefaults()
	if err != nil {
		return nil, fmt.Errorf("service config: %w", err)
	}
	v, err := newProtoValidator()
	if err != nil {
		return nil, err
	}
	s := &Server{
		cfg:       cfg,
		health:    health.NewServer(),
		metrics:   newMetrics(),
		runs:      newAdmission(cfg.MaxConcurrentRuns, cfg.QueueLength, cfg.QueueTimeout, cfg.RetryAfter),
		lockstep:  &limiter{limit: int64(cfg.MaxLockstepStreams), retry: cfg.RetryAfter},
		perClient: newClientShare(cfg.MaxLockstepStreamsPerClient, cfg.RetryAfter),
		validator: v,
		drained:   make(chan struct{}),
	}
	s.drainCtx, s.drainCancel = context.WithCancel(context.Background())
	s.runs.onWait = func(d int) { s.metrics.queued.Add(float64(d)) }

	rec := recoveryHandler(cfg.Logger)
	unary := []grpc.UnaryServerInterceptor{
		s.metrics.grpc.UnaryServerInterceptor(),
		loggingUnary(cfg.Logger, cfg.MaxCallDuration),
		decodeUnary,
	}
	watchers := &watchLimit{limit: int64(cfg.MaxHealthWatchers), retry: cfg.RetryAfter}
	stream := []grpc.StreamServerInterceptor{
		callMetricsOnly(s.metrics.grpc.StreamServerInterceptor()),
		loggingStream(cfg.Logger, cfg.MaxCallDuration, cfg.abortGrace),
		watchers.stream,
	}
	if cfg.AuthToken != "" {
		a := newTokenAuth(cfg.AuthToken)
		unary = append(unary, a.unary)
		stream = append(stream, a.stream)
	}
	unary = append(unary, recovery.UnaryServerInterceptor(rec))
	stream = append(stream, recovery.StreamServerInterceptor(rec))
	opts := append([]grpc.ServerOption{
		grpc.ChainUnaryInterceptor(unary...),
		grpc.ChainStreamInterceptor(stream...),
	}, transportOptions(cfg)...)
	if cfg.TLS != nil {
		opts = append(opts, grpc.Creds(credentials.NewTLS(cfg.TLS)))
	}
	s.grpc = grpc.NewServer(opts...)
	pb.RegisterChannelServiceServer(s.grpc, &channelServer{s: s})
	pb.RegisterSimulationServiceServer(s.grpc, &simulationServer{s: s})
	pb.RegisterLoopServiceServer(s.grpc, &loopServer{s: s})
	pb.RegisterInfoServiceServer(s.grpc, &infoServer{s: s})
	healthpb.RegisterHealthServer(s.grpc, &healthService{Server: s.health, drained: s.drained})
	if !cfg.DisableReflection {
		reflection.Register(s.grpc)
	}
	s.metrics.grpc.InitializeMetrics(s.grpc)

	s.health.SetServingStatus("", healthpb.HealthCheckResponse_SERVING)
	for name := range s.grpc.GetServiceInfo() {
		s.health.SetServingStatus(name, healthpb.HealthCheckResponse_SERVING)
	}
	return s, nil
}

// GRPC returns the underlying *grpc.Server (to register more services
// before Serve, or to use with a custom listener such as bufconn).
func (s *Server) GRPC() *grpc.Server { return s.grpc }

// Config returns the effective configuration, defaults filled in.
func (s *Server) Config() Config { return s.cfg }

// Serve accepts connections on lis until Shutdown or Stop; it returns nil
// after a shutdown and the listener's error otherwise.
func (s *Server) Serve(lis net.Listener) error {
	err := s.grpc.Serve(lis)
	if errors.Is(err, grpc.ErrServerStopped) {
		return nil
	}
	return err
}

// MetricsHandler serves the Prometheus metrics (mount it on a separate
// HTTP listener, e.g. at /metrics).
func (s *Server) MetricsHandler() http.Handler { return s.metrics.handler() }

// Shutdown drains the server: health turns NOT_SERVING (health watchers
// are told, then their streams end), and after Config.DrainNotice no new
// calls are accepted while in-flight calls run to completion; open Lockstep
// streams (interactive, without an end of their own) are then ended with
// UNAVAILABLE so that their clients reconnect elsewhere. When ctx ends
// first the remaining calls are cancelled and Shutdown returns ctx's error.
func (s *Server) Shutdown(ctx context.Context) error {
	s.draining.Store(true)
	s.health.Shutdown()
	if s.cfg.DrainNotice > 0 {
		t := time.NewTimer(s.cfg.DrainNotice)
		select {
		case <-t.C:
		case <-ctx.Done():
		}
		t.Stop()
	}
	s.drainOnce.Do(s.markDrained)
	done := make(chan struct{})
	go func() {
		s.grpc.GracefulStop()
		close(done)
	}()
	select {
	case <-done:
		return nil
	case <-ctx.Done():
		s.grpc.Stop()
		<-done
		return ctx.Err()
	}
}

// markDrained ends health watchers and open Lockstep streams.
func (s *Server) markDrained() {
	close(s.drained)
	s.drainCancel()
}

// Stop closes every connection and cancels every call at once.
func (s *Server) Stop() {
	s.draining.Store(true)
	s.health.Shutdown()
	s.drainOnce.Do(s.markDrained)
	s.grpc.Stop()
}

// hook calls the test hook, if any.
func (s *Server) hook(ctx context.Context, method string) {
	if s.cfg.testHook != nil {
		s.cfg.testHook(ctx, method)
	}
}

// admit checks the cost against the bound and takes a run slot. On success
// the caller must call release once the run is over.
func (s *Server) admit(ctx context.Context, what string, cost int64) (release func(), err error) {
	infoFrom(ctx).cost.Store(cost)
	if cost > s.cfg.MaxCost {
		s.metrics.rejected.WithLabelValues("cost").Inc()
		return nil, costExceeded(what, cost, s.cfg.MaxCost)
	}
	rel, err := s.runs.acquire(ctx)
	if err != nil {
		s.metrics.rejected.WithLabelValues("busy").Inc()
		return nil, err
	}
	s.metrics.inFlight.Inc()
	return func() {
		s.metrics.inFlight.Dec()
		rel()
	}, nil
}

// reject counts and returns an INVALID_ARGUMENT for vs.
func (s *Server) reject(vs []Violation) error {
	s.metrics.rejected.WithLabelValues("invalid").Inc()
	return invalidArgument(vs)
}

// transportOptions are the server's codec, message-size, keepalive and
// flow-control settings (everything but interceptors and credentials);
// the Lockstep echo benchmark builds its bare stream with the same ones.
func transportOptions(cfg Config) []grpc.ServerOption {
	return []grpc.ServerOption{
		// Undecodable requests are INVALID_ARGUMENT, not INTERNAL.
		grpc.ForceServerCodecV2(newLenientCodec()),
		grpc.MaxConcurrentStreams(uint32(cfg.MaxStreamsPerConnection)),
		grpc.MaxRecvMsgSize(cfg.MaxRecvMessageBytes),
		grpc.MaxSendMsgSize(cfg.MaxSendMessageBytes),
		grpc.KeepaliveEnforcementPolicy(keepalive.EnforcementPolicy{
			MinTime:             cfg.KeepaliveMinTime,
			PermitWithoutStream: true,
		}),
		grpc.KeepaliveParams(keepalive.ServerParameters{
			MaxConnectionAge:      cfg.MaxConnectionAge,
			MaxConnectionAgeGrace: cfg.connectionAgeGrace(),
			Time:                  2 * time.Minute,
			Timeout:               20 * time.Second,
		}),
		// Larger flow-control windows and buffers for StreamGains' bulk
		// chunks over fast links.
		grpc.InitialWindowSize(4 << 20),
		grpc.InitialConnWindowSize(8 << 20),
		grpc.WriteBufferSize(256 << 10),
		grpc.ReadBufferSize(256 << 10),
	}
}
