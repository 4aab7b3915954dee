package main

import (
	"context"
	"errors"
	"flag"
	"net"
	"os"
	"strings"

	"github.com/fadeloop/fadeloop/service"
)

func init() {
	register(&command{
		order:   70,
		name:    "serve",
		summary: "serve the fadeloop gRPC API (the same server as fadeloopd)",
		usage:   "",
		details: `Serves ChannelService, SimulationService, LoopService, grpc.health.v1 and
server reflection on --listen, with the server of package service and the
flags of fadeloopd (validation, cost bound, admission control, logging, panic
recovery, Prometheus metrics on --metrics-listen). Every flag can also be set
by its FADELOOPD_* environment variable (--max-call-duration:
FADELOOPD_MAX_CALL_DURATION); a flag given here wins. Ctrl-C or SIGTERM
drains the server: health turns NOT_SERVING for --drain-notice, then new
calls are refused and calls in flight finish (up to --drain-timeout), then
it stops.

TLS: --tls-cert and --tls-key are the server's certificate and key; with
--client-ca as well, clients must present a certificate signed by that CA
(mutual TLS). --auth-token-file (or FADELOOPD_AUTH_TOKEN) requires a bearer
token on every call except health checks.

` + cautionHelp + `

Examples:
  fadeloop serve
  fadeloop serve --listen 0.0.0.0:8470 --tls-cert server.pem --tls-key server.key
  fadeloop serve --listen 127.0.0.1:0 --tls-cert s.pem --tls-key s.key --client-ca clients-ca.pem`,
		run: runServe,
	})
}

func runServe(e *env, fs *flag.FlagSet) action {
	// The flag set of fadeloopd (package service), with interactive
	// defaults: no metrics listener, text log. The global --tls-cert and
	// --tls-key are the server's certificate and key here.
	d := service.NewDaemonFlags()
	d.MetricsListen = ""
	d.LogFormat = "text"
	d.Register(fs)
	return func(ctx context.Context, rest []string) error {
		return serve(ctx, e, fs, d, rest)
	}
}

// serve runs the server of `fadeloop serve` until ctx ends.
func serve(ctx context.Context, e *env, fs *flag.FlagSet, d *service.DaemonFlags, rest []string) error {
	if len(rest) > 0 {
		return badInputf("unexpected arguments: %s", strings.Join(rest, " "))
	}
	if e.g.tls.CAFile != "" {
		return badInputf("--tls-ca names the CA of a server to call; the CA that client certificates must chain to is --client-ca")
	}
	if err := d.Resolve(fs, os.LookupEnv); err != nil {
		return badInput{err}
	}
	logger, err := d.Logger(e.stderr)
	if err != nil {
		return badInput{err}
	}
	cfg, err := d.Config(logger, os.LookupEnv)
	if err != nil {
		return badInput{err}
	}
	srv, err := service.NewServer(cfg)
	if err != nil {
		return badInput{err}
	}
	err = service.RunDaemon(ctx, context.Background(), srv, d.Options())
	var opErr *net.OpError
	if errors.As(err, &opErr) && opErr.Op == "listen" {
		return badInput{err}
	}
	return err
}
