package service

import (
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"log/slog"
	"runtime"
	"time"

	"github.com/fadeloop/fadeloop/loop"
)

// Default limits of a Config whose fields are left at zero.
const (
	// DefaultMaxCost bounds the work of one call in tap-slots: for a run,
	// sum over users of taps × (slots + warm-up slots) × replications; for a
	// sweep the sum over its points; for StreamGains links × samples × taps.
	// 2e10 tap-slots is a few minutes of engine time on one core.
	DefaultMaxCost = int64(2e10)
	// DefaultMaxCallDuration is the longest a call may run; the server caps
	// every call's deadline at it.
	DefaultMaxCallDuration = 30 * time.Minute
	// DefaultQueueTimeout is how long an admitted-to-queue call waits for a
	// run slot before it is turned away with RESOURCE_EXHAUSTED.
	DefaultQueueTimeout = 10 * time.Second
	// DefaultRetryAfter is the retry delay suggested in RetryInfo when a
	// call is turned away by admission control.
	DefaultRetryAfter = 2 * time.Second
	// DefaultMaxMessageBytes is the default maximum size of a received and a
	// sent message.
	DefaultMaxMessageBytes = 16 << 20
	// DefaultMaxLockstepStreams bounds concurrent Lockstep streams (they are
	// long-lived and mostly idle, so they have their own limit rather than a
	// run slot).
	DefaultMaxLockstepStreams = 256
	// DefaultMaxConnectionAge is the age after which the server asks a
	// client to reconnect (so that clients re-resolve and spread over
	// replicas).
	DefaultMaxConnectionAge = 30 * time.Minute
	// DefaultKeepaliveMinTime is the shortest client keepalive ping interval
	// the server tolerates.
	DefaultKeepaliveMinTime = 10 * time.Second
	// DefaultStreamIdleTimeout is how long a stream may wait for its client:
	// for StreamGains to take the next chunk, for Lockstep to send the next
	// message.
	DefaultStreamIdleTimeout = 2 * time.Minute
	// DefaultMaxStreamsPerConnection bounds the calls open at once on one
	// client connection (HTTP/2 SETTINGS_MAX_CONCURRENT_STREAMS); further
	// calls wait in the client until one ends.
	DefaultMaxStreamsPerConnection = 128
	// DefaultMaxHealthWatchers bounds the grpc.health.v1 Watch streams open
	// at once on a server.
	DefaultMaxHealthWatchers = 1024
	// DefaultStreamAbortGrace is how long a stream handler whose call has
	// ended (cap, idle timeout, drain) gets to return by itself before the
	// stream is closed under it.
	DefaultStreamAbortGrace = time.Second
	// DefaultProgressInterval is the default interval between progress
	// events of Simulate.
	DefaultProgressInterval = 250 * time.Millisecond
)

// Config configures a Server. The zero value is usable: every zero field
// takes its documented default.
type Config struct {
	// MaxCost bounds the work of one call in tap-slots (see DefaultMaxCost);
	// a request above it gets RESOURCE_EXHAUSTED naming the bound.
	MaxCost int64
	// MaxConcurrentRuns bounds the runs (Simulate, Sweep, StreamGains,
	// CheckChannel) executing at once; default runtime.GOMAXPROCS(0).
	MaxConcurrentRuns int
	// QueueLength is how many calls may wait for a run slot; beyond it a
	// call gets RESOURCE_EXHAUSTED with RetryInfo at once. Default
	// MaxConcurrentRuns. Negative means no queue.
	QueueLength int
	// QueueTimeout bounds the wait in the queue (default DefaultQueueTimeout).
	QueueTimeout time.Duration
	// RetryAfter is the delay suggested in RetryInfo (default
	// DefaultRetryAfter).
	RetryAfter time.Duration
	// MaxLockstepStreams bounds concurrent Lockstep streams (default
	// DefaultMaxLockstepStreams).
	MaxLockstepStreams int
	// MaxLockstepStreamsPerClient is the share of MaxLockstepStreams one
	// client (one peer IP address) may hold at once, so that one client
	// cannot lock the others out (default max(1, MaxLockstepStreams/4)).
	MaxLockstepStreamsPerClient int
	// StreamIdleTimeout ends a stream whose client stops reading
	// (StreamGains: one chunk not taken within it) or sending (Lockstep: no
	// message within it) with DEADLINE_EXCEEDED, releasing its slot
	// (default DefaultStreamIdleTimeout).
	StreamIdleTimeout time.Duration
	// MaxStreamsPerConnection bounds the calls open at once on one
	// connection (default DefaultMaxStreamsPerConnection).
	MaxStreamsPerConnection int
	// MaxHealthWatchers bounds the health Watch streams open at once;
	// beyond it Watch gets RESOURCE_EXHAUSTED (default
	// DefaultMaxHealthWatchers).
	MaxHealthWatchers int
	// AuthToken, when not empty, is the bearer token every call but the
	// health checks must carry ("authorization: Bearer TOKEN" metadata);
	// others get UNAUTHENTICATED. It is compared in constant time and never
	// logged. Use it with TLS off loopback: plaintext exposes the token.
	AuthToken string
	// DisableReflection leaves the server reflection service out.
	DisableReflection bool
	// MaxCallDuration caps every call's deadline (default
	// DefaultMaxCallDuration).
	MaxCallDuration time.Duration
	// MaxRecvMessageBytes and MaxSendMessageBytes bound message sizes
	// (default DefaultMaxMessageBytes each).
	MaxRecvMessageBytes int
	// MaxSendMessageBytes: see MaxRecvMessageBytes.
	MaxSendMessageBytes int
	// MaxConnectionAge is the age after which a connection is asked to go
	// away (default DefaultMaxConnectionAge). The grace period after it is
	// always MaxCallDuration plus one minute, longer than any call.
	MaxConnectionAge time.Duration
	// KeepaliveMinTime is the shortest client ping interval tolerated
	// (default DefaultKeepaliveMinTime); faster pingers are disconnected.
	KeepaliveMinTime time.Duration
	// TLS, when non-nil, serves TLS with it (set ClientAuth and ClientCAs
	// for mutual TLS). Nil serves plaintext (loopback use).
	TLS *tls.Config
	// Logger receives the structured call log; default slog.Default().
	Logger *slog.Logger
	// DrainNotice is how long Shutdown keeps accepting calls after health
	// turned NOT_SERVING, so that health checkers and load balancers move
	// traffic away first (default 0).
	DrainNotice time.Duration
	// EngineParallelism is the number of sweep points computed at once;
	// default runtime.GOMAXPROCS(0).
	EngineParallelism int
	// RunReplication, when set, runs every replication of Tune and Capacity
	// elsewhere (tune.Options.RunReplication: e.g. as units of a durable
	// job queue, service/jobs); nil runs them in process. The
	// recommendation does not depend on it.
	RunReplication func(ctx context.Context, sc loop.Scenario) (*loop.Report, error)

	// abortGrace overrides DefaultStreamAbortGrace (tests).
	abortGrace time.Duration

	// testHook, when set, is called by every handler after admission with
	// the method name; tests use it to inject panics and delays.
	testHook func(ctx context.Context, method string)
}

// withDefaults returns c with every zero field set to its default, or an
// error naming a field that is out of range.
func (c Config) withDefaults() (Config, error) {
	var errs []error
	if c.MaxCost < 0 {
		errs = append(errs, fmt.Errorf("MaxCost: must be >= 0, got %d", c.MaxCost))
	}
	if c.MaxCost == 0 {
		c.MaxCost = DefaultMaxCost
	}
	if c.MaxConcurrentRuns < 0 {
		errs = append(errs, fmt.Errorf("MaxConcurrentRuns: must be >= 0, got %d", c.MaxConcurrentRuns))
	}
	if c.MaxConcurrentRuns == 0 {
		c.MaxConcurrentRuns = runtime.GOMAXPROCS(0)
	}
	switch {
	case c.QueueLength == 0:
		c.QueueLength = c.MaxConcurrentRuns
	case c.QueueLength < 0:
		c.QueueLength = 0
	}
	if c.QueueTimeout <= 0 {
		c.QueueTimeout = DefaultQueueTimeout
	}
	if c.RetryAfter <= 0 {
		c.RetryAfter = DefaultRetryAfter
	}
	if c.MaxLockstepStreams <= 0 {
		c.MaxLockstepStreams = DefaultMaxLockstepStreams
	}
	if c.MaxLockstepStreamsPerClient <= 0 {
		c.MaxLockstepStreamsPerClient = max(1, c.MaxLockstepStreams/4)
	}
	if c.StreamIdleTimeout <= 0 {
		c.StreamIdleTimeout = DefaultStreamIdleTimeout
	}
	if c.MaxStreamsPerConnection <= 0 {
		c.MaxStreamsPerConnection = DefaultMaxStreamsPerConnection
	}
	if c.MaxHealthWatchers <= 0 {
		c.MaxHealthWatchers = DefaultMaxHealthWatchers
	}
	if c.abortGrace <= 0 {
		c.abortGrace = DefaultStreamAbortGrace
	}
	if c.MaxCallDuration <= 0 {
		c.MaxCallDuration = DefaultMaxCallDuration
	}
	if c.MaxRecvMessageBytes <= 0 {
		c.MaxRecvMessageBytes = DefaultMaxMessageBytes
	}
	if c.MaxSendMessageBytes <= 0 {
		c.MaxSendMessageBytes = DefaultMaxMessageBytes
	}
	if c.MaxSendMessageBytes < 64<<10 {
		errs = append(errs, fmt.Errorf("MaxSendMessageBytes: must be >= 65536, got %d", c.MaxSendMessageBytes))
	}
	if c.MaxConnectionAge <= 0 {
		c.MaxConnectionAge = DefaultMaxConnectionAge
	}
	if c.KeepaliveMinTime <= 0 {
		c.KeepaliveMinTime = DefaultKeepaliveMinTime
	}
	if c.Logger == nil {
		c.Logger = slog.Default()
	}
	if c.EngineParallelism <= 0 {
		c.EngineParallelism = runtime.GOMAXPROCS(0)
	}
	return c, errors.Join(errs...)
}

// connectionAgeGrace is the time a connection past MaxConnectionAge is given
// to finish its calls: longer than the longest allowed call.
func (c Config) connectionAgeGrace() time.Duration {
	return c.MaxCallDuration + time.Minute
}
