package main

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"os"
	"strings"
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

func runServe(ctx context.Context, e *env, args []string) error {
	c := lookup("serve")
	fs := e.newFlagSet(c)
	listen := fs.String("listen", "127.0.0.1:8470", "gRPC listen `ADDR` (port 0 picks a free port, printed on stderr)")
	metricsListen := fs.String("metrics-listen", "", "Prometheus metrics HTTP listen `ADDR` serving /metrics (empty: none)")
	maxCost := fs.Int64("max-cost", service.DefaultMaxCost, "cost bound of one call in tap-slots (`N`)")
	maxRuns := fs.Int("max-concurrent-runs", 0, "runs executing at once (`N`, 0: GOMAXPROCS)")
	drain := fs.Duration("drain-timeout", time.Minute, "on Ctrl-C or SIGTERM, how long calls in flight may run (`DURATION`)")
	logLevel := fs.String("log-level", "info", "log `LEVEL`: debug, info, warn or error")
	rest, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(rest) > 0 {
		return badInputf("unexpected arguments: %s", strings.Join(rest, " "))
	}
	var lv slog.Level
	if err := lv.UnmarshalText([]byte(*logLevel)); err != nil {
		return badInputf("--log-level: %v", err)
	}
	logger := slog.New(slog.NewTextHandler(e.stderr, &slog.HandlerOptions{Level: lv}))
	tc, err := serverTLS(e.g.tls.CertFile, e.g.tls.KeyFile, e.g.tls.CAFile)
	if err != nil {
		return badInput{err}
	}
	srv, err := service.NewServer(service.Config{MaxCost: *maxCost, MaxConcurrentRuns: *maxRuns, TLS: tc, Logger: logger})
	if err != nil {
		return badInput{err}
	}
	lis, err := net.Listen("tcp", *listen)
	if err != nil {
		return badInputf("--listen %s: %v", *listen, err)
	}
	var metricsSrv *http.Server
	if *metricsListen != "" {
		mlis, err := net.Listen("tcp", *metricsListen)
		if err != nil {
			lis.Close()
			return badInputf("--metrics-listen %s: %v", *metricsListen, err)
		}
		mux := http.NewServeMux()
		mux.Handle("/metrics", srv.MetricsHandler())
		metricsSrv = &http.Server{Handler: mux, ReadHeaderTimeout: 10 * time.Second}
		go func() { _ = metricsSrv.Serve(mlis) }()
		logger.Info("metrics listening", slog.String("metrics_addr", mlis.Addr().String()))
	}
	logger.Info("listening", slog.String("grpc_addr", lis.Addr().String()), slog.Bool("tls", tc != nil),
		slog.Bool("mutual_tls", tc != nil && tc.ClientCAs != nil))
	served := make(chan error, 1)
	go func() { served <- srv.Serve(lis) }()
	select {
	case err := <-served:
		return err
	case <-ctx.Done():
	}
	logger.Info("draining", slog.Duration("drain_timeout", *drain))
	dctx, cancel := context.WithTimeout(context.Background(), *drain)
	defer cancel()
	drainErr := srv.Shutdown(dctx)
	if metricsSrv != nil {
		_ = metricsSrv.Close()
	}
	if err := <-served; err != nil {
		return err
	}
	if drainErr != nil {
		logger.Warn("drain cut short; remaining calls cancelled", slog.String("error", drainErr.Error()))
	} else {
		logger.Info("stopped")
	}
	return nil
}

// serverTLS loads the server certificate and, with caFile, the CA that
// client certificates must chain to.
func serverTLS(certFile, keyFile, caFile string) (*tls.Config, error) {
	if certFile == "" && keyFile == "" {
		if caFile != "" {
			return nil, errors.New("--tls-ca needs --tls-cert and --tls-key")
		}
		return nil, nil
	}
	if certFile == "" || keyFile == "" {
		return nil, errors.New("--tls-cert and --tls-key go together")
	}
	cert, err := tls.LoadX509KeyPair(certFile, keyFile)
	if err != nil {
		return nil, fmt.Errorf("TLS key pair: %w", err)
	}
	cfg := &tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12}
	if caFile != "" {
		pemBytes, err := os.ReadFile(caFile)
		if err != nil {
			return nil, fmt.Errorf("--tls-ca: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pemBytes) {
			return nil, fmt.Errorf("--tls-ca %s: no PEM certificates", caFile)
		}
		cfg.ClientCAs = pool
		cfg.ClientAuth = tls.RequireAndVerifyClientCert
	}
	return cfg, nil
}
