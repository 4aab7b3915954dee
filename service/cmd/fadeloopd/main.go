// Command fadeloopd serves the fadeloop gRPC API (ChannelService,
// SimulationService, LoopService, grpc.health.v1 and server reflection) on
// one listener and Prometheus metrics on another.
//
// It listens on loopback by default; give -tls-cert and -tls-key to serve
// TLS, and -client-ca as well for mutual TLS; -auth-token-file (or
// FADELOOPD_AUTH_TOKEN) requires a bearer token on every call but health.
// Every flag can be set by its FADELOOPD_* environment variable. SIGINT or
// SIGTERM drains the server (health NOT_SERVING for -drain-notice, then new
// calls refused and in-flight calls finish, up to -drain-timeout), then
// stops it; a second signal stops it at once.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"strings"
	"syscall"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/service"
)

// cautionUsage is loop.Caution wrapped at 78 columns for the usage text.
var cautionUsage = wrap78(loop.Caution)

// wrap78 breaks s at spaces into lines of at most 78 characters (a longer
// word stays whole on its own line).
func wrap78(s string) string {
	var lines []string
	line := ""
	for _, w := range strings.Fields(s) {
		if line != "" && len(line)+1+len(w) > 78 {
			lines = append(lines, line)
			line = ""
		}
		if line != "" {
			line += " "
		}
		line += w
	}
	return strings.Join(append(lines, line), "\n")
}

func main() {
	if err := run(os.Args[1:], os.Stderr); err != nil {
		fmt.Fprintln(os.Stderr, "fadeloopd:", err)
		os.Exit(1)
	}
}

// parseFlags parses the daemon flags (service.DaemonFlags, shared with
// `fadeloop serve`) and fills those not given from FADELOOPD_* variables.
func parseFlags(args []string, stderr io.Writer, getenv func(string) (string, bool)) (*service.DaemonFlags, error) {
	d := service.NewDaemonFlags()
	fs := flag.NewFlagSet("fadeloopd", flag.ContinueOnError)
	fs.SetOutput(stderr)
	d.Register(fs)
	fs.Usage = func() {
		fmt.Fprintf(stderr, "Usage: fadeloopd [flags]\n\nEvery flag can also be set by an environment variable: -max-call-duration\nas %s (a flag on the command line wins). The bearer token\ncan come from %s instead of -auth-token-file.\n\n%s\n\nFlags:\n",
			service.EnvName("max-call-duration"), service.EnvAuthToken, cautionUsage)
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	if fs.NArg() > 0 {
		return nil, fmt.Errorf("unexpected arguments: %s", strings.Join(fs.Args(), " "))
	}
	if err := d.Resolve(fs, getenv); err != nil {
		return nil, err
	}
	return d, nil
}

func run(args []string, stderr io.Writer) error {
	return runEnv(args, stderr, os.LookupEnv)
}

func runEnv(args []string, stderr io.Writer, getenv func(string) (string, bool)) error {
	if len(args) > 0 && args[0] == "worker" {
		return runWorker(args[1:], stderr) // worker.go
	}
	d, err := parseFlags(args, stderr, getenv)
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return nil
		}
		return err
	}
	logger, err := d.Logger(stderr)
	if err != nil {
		return err
	}
	cfg, err := d.Config(logger, getenv)
	if err != nil {
		return err
	}
	srv, err := service.NewServer(cfg)
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
	return service.RunDaemon(ctx, stop, srv, d.Options())
}
