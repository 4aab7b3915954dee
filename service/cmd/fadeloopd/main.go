// Command fadeloopd serves the fadeloop gRPC API (ChannelService,
// SimulationService, LoopService, grpc.health.v1 and server reflection) on
// one listener and Prometheus metrics on another.
//
// It listens on loopback by default; give -tls-cert and -tls-key to serve
// TLS, and -client-ca as well for mutual TLS. SIGINT or SIGTERM drains the
// server (health NOT_SERVING, in-flight calls finish, up to -drain-timeout),
// then stops it; a second signal stops it at once.
package main

import (
	"context"
	"crypto/tls"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"strings"
	"syscall"
	"time"

	"github.com/fadeloop/fadeloop/service"
)

func main() {
	if err := run(os.Args[1:], os.Stderr); err != nil {
		fmt.Fprintln(os.Stderr, "fadeloopd:", err)
		os.Exit(1)
	}
}

type options struct {
	listen, metricsListen        string
	httpListen                   string
	tlsCert, tlsKey, clientCA    string
	maxCost                      int64
	maxRuns, queueLen            int
	queueTimeout, maxCall        time.Duration
	maxLockstep, maxMsgBytes     int
	maxConnAge, drainTimeout     time.Duration
	logLevel, logFormat          string
	engineParallelism            int
	keepaliveMinTime, retryAfter time.Duration
}

func parseFlags(args []string, stderr io.Writer) (*options, error) {
	o := &options{}
	fs := flag.NewFlagSet("fadeloopd", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.StringVar(&o.listen, "listen", "127.0.0.1:8470", "gRPC listen address (host:port; port 0 picks a free port)")
	fs.StringVar(&o.metricsListen, "metrics-listen", "127.0.0.1:8471", "Prometheus metrics HTTP listen address, serving /metrics (empty: no metrics listener)")
	fs.StringVar(&o.httpListen, "http-listen", "", "HTTP/JSON listen address: Connect, gRPC-Web and /v1/ routes for curl and browsers (empty: none)")
	fs.StringVar(&o.tlsCert, "tls-cert", "", "PEM server certificate chain file (serve TLS; needs -tls-key)")
	fs.StringVar(&o.tlsKey, "tls-key", "", "PEM private key file of -tls-cert")
	fs.StringVar(&o.clientCA, "client-ca", "", "PEM CA bundle: require and verify client certificates (mutual TLS; needs -tls-cert)")
	fs.Int64Var(&o.maxCost, "max-cost", service.DefaultMaxCost, "cost bound of one call in tap-slots (users × taps × slots × replications, summed over sweep points)")
	fs.IntVar(&o.maxRuns, "max-concurrent-runs", 0, "runs executing at once (0: GOMAXPROCS)")
	fs.IntVar(&o.queueLen, "queue-length", 0, "calls that may wait for a run slot (0: same as -max-concurrent-runs, negative: no queue)")
	fs.DurationVar(&o.queueTimeout, "queue-timeout", service.DefaultQueueTimeout, "longest wait in the admission queue")
	fs.DurationVar(&o.retryAfter, "retry-after", service.DefaultRetryAfter, "retry delay suggested to callers turned away when busy")
	fs.DurationVar(&o.maxCall, "max-call-duration", service.DefaultMaxCallDuration, "longest allowed call; every call's deadline is capped at it")
	fs.IntVar(&o.maxLockstep, "max-lockstep-streams", service.DefaultMaxLockstepStreams, "concurrent Lockstep streams")
	fs.IntVar(&o.maxMsgBytes, "max-message-bytes", service.DefaultMaxMessageBytes, "largest message received or sent, bytes")
	fs.DurationVar(&o.maxConnAge, "max-connection-age", service.DefaultMaxConnectionAge, "age after which a client is asked to reconnect (grace: -max-call-duration + 1m)")
	fs.DurationVar(&o.keepaliveMinTime, "keepalive-min-time", service.DefaultKeepaliveMinTime, "shortest client keepalive ping interval tolerated")
	fs.DurationVar(&o.drainTimeout, "drain-timeout", time.Minute, "on SIGINT/SIGTERM, how long in-flight calls may run before they are cancelled")
	fs.IntVar(&o.engineParallelism, "engine-parallelism", 0, "sweep points and gain links computed at once per call (0: GOMAXPROCS)")
	fs.StringVar(&o.logLevel, "log-level", "info", "log level: debug, info, warn or error")
	fs.StringVar(&o.logFormat, "log-format", "json", "log format: json or text")
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	if fs.NArg() > 0 {
		return nil, fmt.Errorf("unexpected arguments: %s", strings.Join(fs.Args(), " "))
	}
	if (o.tlsCert == "") != (o.tlsKey == "") {
		return nil, errors.New("-tls-cert and -tls-key go together")
	}
	if o.clientCA != "" && o.tlsCert == "" {
		return nil, errors.New("-client-ca needs -tls-cert and -tls-key")
	}
	return o, nil
}

func newLogger(level, format string, w io.Writer) (*slog.Logger, error) {
	var lv slog.Level
	if err := lv.UnmarshalText([]byte(level)); err != nil {
		return nil, fmt.Errorf("-log-level: %v", err)
	}
	ho := &slog.HandlerOptions{Level: lv}
	switch format {
	case "json":
		return slog.New(slog.NewJSONHandler(w, ho)), nil
	case "text":
		return slog.New(slog.NewTextHandler(w, ho)), nil
	}
	return nil, fmt.Errorf("-log-format: must be json or text, got %q", format)
}

// tlsConfig loads the server certificate and, for mutual TLS, the client CA.
func tlsConfig(certFile, keyFile, caFile string) (*tls.Config, error) {
	return service.ServerTLSConfig(certFile, keyFile, caFile)
}

func run(args []string, stderr io.Writer) error {
	o, err := parseFlags(args, stderr)
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return nil
		}
		return err
	}
	logger, err := newLogger(o.logLevel, o.logFormat, stderr)
	if err != nil {
		return err
	}
	tc, err := tlsConfig(o.tlsCert, o.tlsKey, o.clientCA)
	if err != nil {
		return err
	}
	srv, err := service.NewServer(service.Config{
		MaxCost:             o.maxCost,
		MaxConcurrentRuns:   o.maxRuns,
		QueueLength:         o.queueLen,
		QueueTimeout:        o.queueTimeout,
		RetryAfter:          o.retryAfter,
		MaxLockstepStreams:  o.maxLockstep,
		MaxCallDuration:     o.maxCall,
		MaxRecvMessageBytes: o.maxMsgBytes,
		MaxSendMessageBytes: o.maxMsgBytes,
		MaxConnectionAge:    o.maxConnAge,
		KeepaliveMinTime:    o.keepaliveMinTime,
		TLS:                 tc,
		Logger:              logger,
		EngineParallelism:   o.engineParallelism,
	})
	if err != nil {
		return err
	}
	// The first SIGINT/SIGTERM starts the drain; a second one stops at once.
	sigs := make(chan os.Signal, 2)
	signal.Notify(sigs, syscall.SIGINT, syscall.SIGTERM)
	defer signal.Stop(sigs)
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	stop, hardStop := context.WithCancel(context.Background())
	defer hardStop()
	go func() {
		select {
		case sig := <-sigs:
			logger.Info("signal", slog.String("signal", sig.String()))
			cancel()
		case <-stop.Done():
			return
		}
		select {
		case sig := <-sigs:
			logger.Warn("second signal: stopping now", slog.String("signal", sig.String()))
			hardStop()
		case <-stop.Done():
		}
	}()
	return service.RunDaemon(ctx, stop, srv, service.DaemonOptions{
		Listen:        o.listen,
		MetricsListen: o.metricsListen,
		HTTPListen:    o.httpListen,
		DrainTimeout:  o.drainTimeout,
	})
}
