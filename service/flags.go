package service

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"strings"
	"time"
)

// EnvPrefix starts the environment variable of every daemon flag: flag
// -max-call-duration is FADELOOPD_MAX_CALL_DURATION. A flag given on the
// command line wins over its variable.
const EnvPrefix = "FADELOOPD_"

// EnvAuthToken is the environment variable that may carry the bearer token
// itself (instead of -auth-token-file).
const EnvAuthToken = EnvPrefix + "AUTH_TOKEN"

// DaemonFlags is the one flag set of the server: fadeloopd and `fadeloop
// serve` both register it (same names, same meaning), read the matching
// environment variables with Resolve, and build their server from Config
// and Options. Set fields before Register to change a default.
type DaemonFlags struct {
	Listen, MetricsListen, PprofListen string
	HTTPListen                         string
	TLSCert, TLSKey, ClientCA          string
	AuthTokenFile                      string
	MaxCost                            int64
	MaxConcurrentRuns, QueueLength     int
	QueueTimeout, RetryAfter           time.Duration
	MaxCallDuration, StreamIdleTimeout time.Duration
	MaxLockstepStreams                 int
	MaxLockstepStreamsPerClient        int
	MaxStreamsPerConnection            int
	MaxHealthWatchers                  int
	MaxMessageBytes                    int
	MaxConnectionAge, KeepaliveMinTime time.Duration
	DrainTimeout, DrainNotice          time.Duration
	EngineParallelism                  int
	Reflection                         bool
	LogLevel, LogFormat                string

	names    []string // flags of this set, for Resolve
	borrowed []func() // copy values of flags the FlagSet already had
}

// NewDaemonFlags returns the flags at their defaults (fadeloopd's).
func NewDaemonFlags() *DaemonFlags {
	return &DaemonFlags{
		Listen:             "127.0.0.1:8470",
		MetricsListen:      "127.0.0.1:8471",
		MaxCost:            DefaultMaxCost,
		QueueTimeout:       DefaultQueueTimeout,
		RetryAfter:         DefaultRetryAfter,
		MaxCallDuration:    DefaultMaxCallDuration,
		StreamIdleTimeout:  DefaultStreamIdleTimeout,
		MaxLockstepStreams: DefaultMaxLockstepStreams,
		// 0: a quarter of -max-lockstep-streams.
		MaxStreamsPerConnection: DefaultMaxStreamsPerConnection,
		MaxHealthWatchers:       DefaultMaxHealthWatchers,
		MaxMessageBytes:         DefaultMaxMessageBytes,
		MaxConnectionAge:        DefaultMaxConnectionAge,
		KeepaliveMinTime:        DefaultKeepaliveMinTime,
		DrainTimeout:            time.Minute,
		Reflection:              true,
		LogLevel:                "info",
		LogFormat:               "json",
	}
}

// EnvName is the environment variable of flag name.
func EnvName(name string) string {
	return EnvPrefix + strings.ToUpper(strings.ReplaceAll(name, "-", "_"))
}

// Register defines the flags in fs. A string flag that fs already has
// (the CLI's global -tls-cert and -tls-key) is shared rather than defined
// twice: its value is read by Resolve.
func (d *DaemonFlags) Register(fs *flag.FlagSet) {
	str := func(p *string, name, usage string) {
		d.names = append(d.names, name)
		if f := fs.Lookup(name); f != nil {
			d.borrowed = append(d.borrowed, func() { *p = f.Value.String() })
			return
		}
		fs.StringVar(p, name, *p, usage)
	}
	dur := func(p *time.Duration, name, usage string) {
		d.names = append(d.names, name)
		fs.DurationVar(p, name, *p, usage)
	}
	num := func(p *int, name, usage string) {
		d.names = append(d.names, name)
		fs.IntVar(p, name, *p, usage)
	}
	str(&d.Listen, "listen", "gRPC listen `ADDR` host:port (port 0 picks a free port, logged as grpc_addr)")
	str(&d.MetricsListen, "metrics-listen", "Prometheus metrics HTTP listen `ADDR`, serving /metrics (empty: none)")
	str(&d.HTTPListen, "http-listen", "HTTP/JSON listen `ADDR`: Connect, gRPC-Web and /v1/ routes for curl and browsers (empty: none)")
	str(&d.PprofListen, "pprof-listen", "Go profiler (net/http/pprof) listen `ADDR`, loopback only, e.g. 127.0.0.1:6060 (empty: none)")
	str(&d.TLSCert, "tls-cert", "PEM server certificate chain `FILE` (serve TLS; with -tls-key)")
	str(&d.TLSKey, "tls-key", "PEM private key `FILE` of -tls-cert")
	str(&d.ClientCA, "client-ca", "PEM CA bundle `FILE`: require client certificates signed by it (mutual TLS; needs -tls-cert)")
	str(&d.AuthTokenFile, "auth-token-file", "`FILE` holding the bearer token every call but health must carry (or set "+EnvAuthToken+"; empty: no token)")
	d.names = append(d.names, "max-cost")
	fs.Int64Var(&d.MaxCost, "max-cost", d.MaxCost, "cost bound of one call in tap-slots `N` (users × taps × slots × replications, summed over sweep points)")
	num(&d.MaxConcurrentRuns, "max-concurrent-runs", "runs executing at once `N` (0: GOMAXPROCS)")
	num(&d.QueueLength, "queue-length", "calls `N` that may wait for a run slot (0: same as -max-concurrent-runs; negative: no queue)")
	dur(&d.QueueTimeout, "queue-timeout", "longest wait in the admission queue")
	dur(&d.RetryAfter, "retry-after", "retry delay suggested to callers turned away when busy")
	dur(&d.MaxCallDuration, "max-call-duration", "longest allowed call; every call's deadline is capped at it")
	dur(&d.StreamIdleTimeout, "stream-idle-timeout", "end a stream whose client takes no StreamGains chunk or sends no Lockstep message for this long")
	num(&d.MaxLockstepStreams, "max-lockstep-streams", "concurrent Lockstep streams `N`")
	num(&d.MaxLockstepStreamsPerClient, "max-lockstep-streams-per-client", "Lockstep streams `N` one client IP address may hold (0: a quarter of -max-lockstep-streams)")
	num(&d.MaxStreamsPerConnection, "max-streams-per-connection", "calls `N` open at once on one client connection")
	num(&d.MaxHealthWatchers, "max-health-watchers", "health Watch streams `N` open at once")
	num(&d.MaxMessageBytes, "max-message-bytes", "largest message received or sent, `BYTES`")
	dur(&d.MaxConnectionAge, "max-connection-age", "age after which a client is asked to reconnect (grace: -max-call-duration + 1m)")
	dur(&d.KeepaliveMinTime, "keepalive-min-time", "shortest client keepalive ping interval tolerated")
	dur(&d.DrainNotice, "drain-notice", "on SIGINT/SIGTERM, how long health reports NOT_SERVING while calls are still accepted, before new ones are refused")
	dur(&d.DrainTimeout, "drain-timeout", "on SIGINT/SIGTERM, how long calls in flight may run after the notice before they are cancelled")
	num(&d.EngineParallelism, "engine-parallelism", "sweep points and gain links `N` computed at once per call (0: GOMAXPROCS)")
	d.names = append(d.names, "reflection")
	fs.BoolVar(&d.Reflection, "reflection", d.Reflection, "serve gRPC server reflection (-reflection=false to turn it off)")
	str(&d.LogLevel, "log-level", logLevelUsage)
	str(&d.LogFormat, "log-format", logFormatUsage)
}

// Usage of the log flags, the daemon's and its worker's.
const (
	logLevelUsage  = "log `LEVEL`: debug, info, warn or error"
	logFormatUsage = "log `FORMAT`: json or text"
)

// RegisterLogFlags binds -log-level and -log-format alone, with the
// daemon's defaults and wording (for `fadeloopd worker`, whose other flags
// are its own); Logger then builds the logger.
func (d *DaemonFlags) RegisterLogFlags(fs *flag.FlagSet) {
	fs.StringVar(&d.LogLevel, "log-level", d.LogLevel, logLevelUsage)
	fs.StringVar(&d.LogFormat, "log-format", d.LogFormat, logFormatUsage)
}

// Resolve is called after fs.Parse: every flag not given on the command
// line takes its environment variable (EnvName), if set; getenv is
// os.LookupEnv or a test's map. An unparsable variable is an error naming
// it.
func (d *DaemonFlags) Resolve(fs *flag.FlagSet, getenv func(string) (string, bool)) error {
	given := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { given[f.Name] = true })
	var errs []error
	for _, name := range d.names {
		if given[name] {
			continue
		}
		v, ok := getenv(EnvName(name))
		if !ok {
			continue
		}
		if err := fs.Set(name, v); err != nil {
			errs = append(errs, fmt.Errorf("%s=%q: %v", EnvName(name), v, err))
		}
	}
	for _, b := range d.borrowed {
		b()
	}
	if (d.TLSCert == "") != (d.TLSKey == "") {
		errs = append(errs, errors.New("-tls-cert and -tls-key go together"))
	}
	if d.ClientCA != "" && d.TLSCert == "" {
		errs = append(errs, errors.New("-client-ca needs -tls-cert and -tls-key"))
	}
	if d.PprofListen != "" {
		if err := checkLoopback(d.PprofListen); err != nil {
			errs = append(errs, fmt.Errorf("-pprof-listen: %w", err))
		}
	}
	return errors.Join(errs...)
}

// Logger builds the server's logger writing to w.
func (d *DaemonFlags) Logger(w io.Writer) (*slog.Logger, error) {
	var lv slog.Level
	if err := lv.UnmarshalText([]byte(d.LogLevel)); err != nil {
		return nil, fmt.Errorf("-log-level: %v", err)
	}
	ho := &slog.HandlerOptions{Level: lv}
	switch d.LogFormat {
	case "json":
		return slog.New(slog.NewJSONHandler(w, ho)), nil
	case "text":
		return slog.New(slog.NewTextHandler(w, ho)), nil
	}
	return nil, fmt.Errorf("-log-format: must be json or text, got %q", d.LogFormat)
}

// authToken reads the bearer token: the file of -auth-token-file, else
// the variable EnvAuthToken, else none. Surrounding white space is removed.
func (d *DaemonFlags) authToken(getenv func(string) (string, bool)) (string, error) {
	if d.AuthTokenFile != "" {
		b, err := os.ReadFile(d.AuthTokenFile)
		if err != nil {
			return "", fmt.Errorf("-auth-token-file: %w", err)
		}
		tok := strings.TrimSpace(string(b))
		if tok == "" {
			return "", fmt.Errorf("-auth-token-file %s: the file is empty", d.AuthTokenFile)
		}
		return tok, nil
	}
	if v, ok := getenv(EnvAuthToken); ok {
		tok := strings.TrimSpace(v)
		if tok == "" {
			return "", fmt.Errorf("%s is set but empty", EnvAuthToken)
		}
		return tok, nil
	}
	return "", nil
}

// Config builds the server configuration (TLS and token files are read
// here) with logger; getenv is as for Resolve.
func (d *DaemonFlags) Config(logger *slog.Logger, getenv func(string) (string, bool)) (Config, error) {
	tc, err := ServerTLSConfig(d.TLSCert, d.TLSKey, d.ClientCA)
	if err != nil {
		return Config{}, err
	}
	tok, err := d.authToken(getenv)
	if err != nil {
		return Config{}, err
	}
	return Config{
		MaxCost:                     d.MaxCost,
		MaxConcurrentRuns:           d.MaxConcurrentRuns,
		QueueLength:                 d.QueueLength,
		QueueTimeout:                d.QueueTimeout,
		RetryAfter:                  d.RetryAfter,
		MaxLockstepStreams:          d.MaxLockstepStreams,
		MaxLockstepStreamsPerClient: d.MaxLockstepStreamsPerClient,
		StreamIdleTimeout:           d.StreamIdleTimeout,
		MaxStreamsPerConnection:     d.MaxStreamsPerConnection,
		MaxHealthWatchers:           d.MaxHealthWatchers,
		MaxCallDuration:             d.MaxCallDuration,
		MaxRecvMessageBytes:         d.MaxMessageBytes,
		MaxSendMessageBytes:         d.MaxMessageBytes,
		MaxConnectionAge:            d.MaxConnectionAge,
		KeepaliveMinTime:            d.KeepaliveMinTime,
		TLS:                         tc,
		AuthToken:                   tok,
		DisableReflection:           !d.Reflection,
		Logger:                      logger,
		DrainNotice:                 d.DrainNotice,
		EngineParallelism:           d.EngineParallelism,
	}, nil
}

// Options are the listeners and drain policy for RunDaemon.
func (d *DaemonFlags) Options() DaemonOptions {
	return DaemonOptions{
		Listen:        d.Listen,
		MetricsListen: d.MetricsListen,
		PprofListen:   d.PprofListen,
		HTTPListen:    d.HTTPListen,
		DrainTimeout:  d.DrainTimeout,
	}
}
