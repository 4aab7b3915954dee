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
	"net/http/pprof"
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
	PprofListen   string        // net/http/pprof listen address, loopback only; empty: none
	HTTPListen    string        // HTTP/JSON listen address (Connect, gRPC-Web, /v1/ routes; see Server.HTTPHandler); empty: none
	DrainTimeout  time.Duration // how long in-flight calls may run after the drain notice before they are cancelled
}

// checkLoopback accepts a host:port whose host is a loopback IP address or
// "localhost" (the profiler exposes internals and must not be reachable
// from the network).
func checkLoopback(addr string) error {
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		return err
	}
	if host == "localhost" {
		return nil
	}
	if ip := net.ParseIP(host); ip != nil && ip.IsLoopback() {
		return nil
	}
	return fmt.Errorf("%q is not a loopback address (use 127.0.0.1:PORT or [::1]:PORT)", addr)
}

// serveHTTP serves h on addr in the background and returns the server and
// its bound address.
func serveHTTP(logger *slog.Logger, what, addr string, h http.Handler) (*http.Server, string, error) {
	lis, err := net.Listen("tcp", addr)
	if err != nil {
		return nil, "", fmt.Errorf("%s listen %s: %w", what, addr, err)
	}
	hs := &http.Server{Handler: h, ReadHeaderTimeout: 10 * time.Second}
	go func() {
		if err := hs.Serve(lis); err != nil && !errors.Is(err, http.ErrServerClosed) {
			logger.Error(what+" listener failed", slog.String("error", err.Error()))
		}
	}()
	return hs, lis.Addr().String(), nil
}

// RunDaemon serves srv on o.Listen (its metrics on o.MetricsListen, the
// profiler on o.PprofListen) until ctx ends, then drains it: health turns
// NOT_SERVING for Config.DrainNotice while calls are still accepted, then
// new calls are refused and in-flight ones finish, for at most
// o.DrainTimeout more or until stop ends, whichever is first; remaining
// calls are then cancelled. It logs "listening" with the
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
	var side []*http.Server // metrics and profiler listeners
	closeSide := func() {
		for _, hs := range side {
			sctx, scancel := context.WithTimeout(context.Background(), 5*time.Second)
			_ = hs.Shutdown(sctx)
			scancel()
		}
	}
	if o.MetricsListen != "" {
		mux := http.NewServeMux()
		mux.Handle("/metrics", srv.MetricsHandler())
		hs, addr, err := serveHTTP(logger, "metrics", o.MetricsListen, mux)
		if err != nil {
			lis.Close()
			return err
		}
		side = append(side, hs)
		logger.Info("metrics listening", slog.String("metrics_addr", addr))
	}
	if o.PprofListen != "" {
		if err := checkLoopback(o.PprofListen); err != nil {
			lis.Close()
			closeSide()
			return fmt.Errorf("pprof listen: %w", err)
		}
		mux := http.NewServeMux()
		mux.HandleFunc("/debug/pprof/", pprof.Index)
		mux.HandleFunc("/debug/pprof/cmdline", pprof.Cmdline)
		mux.HandleFunc("/debug/pprof/profile", pprof.Profile)
		mux.HandleFunc("/debug/pprof/symbol", pprof.Symbol)
		mux.HandleFunc("/debug/pprof/trace", pprof.Trace)
		hs, addr, err := serveHTTP(logger, "pprof", o.PprofListen, mux)
		if err != nil {
			lis.Close()
			closeSide()
			return err
		}
		side = append(side, hs)
		logger.Info("pprof listening", slog.String("pprof_addr", addr))
	}
	if o.HTTPListen != "" {
		stopHTTP, err := serveHTTPFront(srv, o.HTTPListen, logger)
		if err != nil {
			lis.Close()
			closeSide()
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
		logger.Info("draining", slog.Duration("drain_notice", srv.Config().DrainNotice), slog.Duration("drain_timeout", o.DrainTimeout))
	}
	dctx, cancel := context.WithTimeout(stop, srv.Config().DrainNotice+o.DrainTimeout)
	defer cancel()
	drainErr := srv.Shutdown(dctx)
	closeSide()
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
