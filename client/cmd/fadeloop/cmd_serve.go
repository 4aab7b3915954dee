package main

import (
	"context"
	"errors"
	"flag"
	"log/slog"
	"net"
	"time"

	"github.com/fadeloop/fadeloop/service"
)

func init() {
	register(&command{
		order:   70,
		name:    "serve",
		summary: "serve the fadeloop gRPC API (the same server as fadeloopd)",
		usage:   "",
		details: `Serves ChannelService, SimulationService, LoopService, grpc.health.v1 and
server reflection on --listen, with the server of package service (the one
fadeloopd runs: validation, cost bound, admission control, logging, panic
recovery, Prometheus metrics on --metrics-listen). Ctrl-C or SIGTERM drains
the server: health turns NOT_SERVING and calls in flight finish (up to
--drain-timeout), then it stops.

TLS: --tls-cert and --tls-key are the server's certificate and key; with
--tls-ca as well, clients must present a certificate signed by that CA
(mutual TLS).

Examples:
  fadeloop serve
  fadeloop serve --listen 0.0.0.0:8470 --tls-cert server.pem --tls-key server.key
  fadeloop serve --listen 127.0.0.1:0 --tls-cert s.pem --tls-key s.key --tls-ca clients-ca.pem`,
		run: runServe,
	})
}

func runServe(e *env, fs *flag.FlagSet) action {
	listen := fs.String("listen", "127.0.0.1:8470", "gRPC listen `ADDR` (port 0 picks a free port, printed on stderr)")
	metricsListen := fs.String("metrics-listen", "", "Prometheus metrics HTTP listen `ADDR` serving /metrics (empty: none)")
	maxCost := fs.Int64("max-cost", service.DefaultMaxCost, "cost bound of one call in tap-slots (`N`)")
	maxRuns := fs.Int("max-concurrent-runs", 0, "runs executing at once (`N`, 0: GOMAXPROCS)")
	drain := fs.Duration("drain-timeout", time.Minute, "on Ctrl-C or SIGTERM, how long calls in flight may run (`DURATION`)")
	logLevel := fs.String("log-level", "info", "log `LEVEL`: debug, info, warn or error")
	return func(ctx context.Context, args []string) error {
		if err := noArgs(args); err != nil {
			return err
		}
		var lv slog.Level
		if err := lv.UnmarshalText([]byte(*logLevel)); err != nil {
			return badInputf("--log-level: %v", err)
		}
		logger := slog.New(slog.NewTextHandler(e.stderr, &slog.HandlerOptions{Level: lv}))
		tc, err := service.ServerTLSConfig(e.g.tls.CertFile, e.g.tls.KeyFile, e.g.tls.CAFile)
		if err != nil {
			return badInputf("TLS flags (--tls-cert, --tls-key, --tls-ca): %v", err)
		}
		srv, err := service.NewServer(service.Config{MaxCost: *maxCost, MaxConcurrentRuns: *maxRuns, TLS: tc, Logger: logger})
		if err != nil {
			return badInput{err}
		}
		err = service.RunDaemon(ctx, context.Background(), srv, service.DaemonOptions{
			Listen:        *listen,
			MetricsListen: *metricsListen,
			DrainTimeout:  *drain,
		})
		var opErr *net.OpError
		if errors.As(err, &opErr) && opErr.Op == "listen" {
			return badInput{err}
		}
		return err
	}
}
