package service

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
	"time"
)

// ServerTLSConfig loads a PEM server certificate chain and key for TLS and,
// when clientCAFile is not empty, the CA bundle that client certificates
// must chain to (mutual TLS: clients without a valid certificate are
// refused). With certFile and keyFile both empty it returns nil (plaintext).
// TLS 1.2 is the minimum version.
func ServerTLSConfig(certFile, keyFile, clientCAFile string) (*tls.Config, error) {
	if certFile == "" && keyFile == "" {
		if clientCAFile != "" {
			return nil, errors.New("a client CA needs a server certificate and key")
		}
		return nil, nil
	}
	if certFile == "" || keyFile == "" {
		return nil, errors.New("the server certificate and key go together")
	}
	cert, err := tls.LoadX509KeyPair(certFile, keyFile)
	if err != nil {
		return nil, fmt.Errorf("load TLS key pair: %w", err)
	}
	cfg := &tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12}
	if clientCAFile != "" {
		pem, err := os.ReadFile(clientCAFile)
		if err != nil {
			return nil, fmt.Errorf("read client CA: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("client CA %s: no PEM certificates", clientCAFile)
		}
		cfg.ClientCAs = pool
		cfg.ClientAuth = tls.RequireAndVerifyClientCert
	}
	return cfg, nil
}

// DaemonOptions are the listeners and the drain policy of RunDaemon.
type DaemonOptions struct {
	Listen        string        // gRPC listen address host:port; port 0 picks a free port (logged as grpc_addr)
	MetricsListen string        // Prometheus /metrics HTTP listen address; empty: no metrics listener
	HTTPListen    string        // HTTP/JSON listen address (Connect, gRPC-Web, /v1/ routes; see Server.HTTPHandler); empty: none
	DrainTimeout  time.Duration // how long in-flight calls may run after ctx ends before they are cancelled
}

// RunDaemon serves srv on o.Listen (and its metrics on o.MetricsListen)
// until ctx ends, then drains it: health turns NOT_SERVING and in-flight
// calls finish, for at most o.DrainTimeout or until stop ends, whichever is
// first; remaining calls are then cancelled. It logs "listening" with the
// bound address, "draining" and "stopped" through the server's logger.
// fadeloopd and `fadeloop serve` both run their server through it.
func RunDaemon(ctx, stop context.Context, srv *Server, o DaemonOptions) error {
	logger := srv.Config().Logger
	if logger == nil {
		logger = slog.New(slog.DiscardHandler)
	}
	lis, err := net.Listen("tcp", o.Listen)
	if err != nil {
		return fmt.Errorf("listen %s: %w", o.Listen, err)
	}
	var metricsSrv *http.Server
	if o.MetricsListen != "" {
		mlis, err := net.Listen("tcp", o.MetricsListen)
		if err != nil {
			lis.Close()
			return fmt.Errorf("metrics listen %s: %w", o.MetricsListen, err)
		}
		mux := http.NewServeMux()
		mux.Handle("/metrics", srv.MetricsHandler())
		metricsSrv = &http.Server{Handler: mux, ReadHeaderTimeout: 10 * time.Second}
		go func() {
			if err := metricsSrv.Serve(mlis); err != nil && !errors.Is(err, http.ErrServerClosed) {
				logger.Error("metrics listener failed", slog.String("error", err.Error()))
			}
		}()
		logger.Info("metrics listening", slog.String("metrics_addr", mlis.Addr().String()))
	}
	if o.HTTPListen != "" {
		stopHTTP, err := serveHTTPFront(srv, o.HTTPListen, logger)
		if err != nil {
			lis.Close()
			return err
		}
		defer stopHTTP()
	}
	tc := srv.Config().TLS
	logger.Info("listening", slog.String("grpc_addr", lis.Addr().String()), slog.Bool("tls", tc != nil),
		slog.Bool("mutual_tls", tc != nil && tc.ClientCAs != nil))

	serveErr := make(chan error, 1)
	go func() { serveErr <- srv.Serve(lis) }()
	select {
	case err := <-serveErr:
		return err
	case <-ctx.Done():
		logger.Info("draining", slog.Duration("drain_timeout", o.DrainTimeout))
	}
	dctx, cancel := context.WithTimeout(stop, o.DrainTimeout)
	defer cancel()
	drainErr := srv.Shutdown(dctx)
	if metricsSrv != nil {
		mctx, mcancel := context.WithTimeout(context.Background(), 5*time.Second)
		_ = metricsSrv.Shutdown(mctx)
		mcancel()
	}
	if err := <-serveErr; err != nil {
		return err
	}
	if drainErr != nil {
		logger.Warn("drain cut short; remaining calls cancelled", slog.String("error", drainErr.Error()))
	} else {
		logger.Info("stopped")
	}
	return nil
}
