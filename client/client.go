package client

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"os"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// Client is a connection to a fadeloop server (remote, or the embedded
// in-process one) with typed helpers for every RPC. It is safe for
// concurrent use. Close it when done.
type Client struct {
	conn        *grpc.ClientConn
	channel     pb.ChannelServiceClient
	simulation  pb.SimulationServiceClient
	loop        pb.LoopServiceClient
	callTimeout time.Duration
	closeExtra  func()
}

// TLSOptions selects transport security. The zero value is plaintext,
// meant for loopback and trusted networks only.
type TLSOptions struct {
	// Enabled turns TLS on. With only Enabled set the server certificate is
	// checked against the system roots.
	Enabled bool
	// CAFile is a PEM bundle of CA certificates that sign the server
	// certificate (instead of the system roots). Setting it enables TLS.
	CAFile string
	// CertFile and KeyFile are the client's PEM certificate and key for
	// mutual TLS. Setting them enables TLS.
	CertFile, KeyFile string
	// ServerName overrides the name checked in the server certificate
	// (default: the host part of the address).
	ServerName string
}

func (o TLSOptions) enabled() bool {
	return o.Enabled || o.CAFile != "" || o.CertFile != "" || o.KeyFile != ""
}

// Config builds the *tls.Config described by o, or nil for plaintext.
func (o TLSOptions) Config() (*tls.Config, error) {
	if !o.enabled() {
		return nil, nil
	}
	cfg := &tls.Config{MinVersion: tls.VersionTLS12, ServerName: o.ServerName}
	if o.CAFile != "" {
		pemBytes, err := os.ReadFile(o.CAFile)
		if err != nil {
			return nil, fmt.Errorf("TLS CA file: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pemBytes) {
			return nil, fmt.Errorf("TLS CA file %s: no PEM certificates in it", o.CAFile)
		}
		cfg.RootCAs = pool
	}
	if (o.CertFile == "") != (o.KeyFile == "") {
		return nil, errors.New("TLS client certificate: give both the certificate and the key file, or neither")
	}
	if o.CertFile != "" {
		cert, err := tls.LoadX509KeyPair(o.CertFile, o.KeyFile)
		if err != nil {
			return nil, fmt.Errorf("TLS client certificate: %w", err)
		}
		cfg.Certificates = []tls.Certificate{cert}
	}
	return cfg, nil
}

// Options configure Dial.
type Options struct {
	// TLS selects transport security (zero value: plaintext).
	TLS TLSOptions
	// CallTimeout is the deadline given to each call whose context has no
	// deadline of its own; 0 means none.
	CallTimeout time.Duration
	// MaxMessageBytes bounds received messages (default 16 MiB, the
	// server's default maximum).
	MaxMessageBytes int
	// DialOptions are appended to the ones Dial builds (for tests and
	// special transports).
	DialOptions []grpc.DialOption
	// NoServiceConfig leaves out the built-in service config (retries and
	// round_robin); a config from name resolution then applies.
	NoServiceConfig bool
	// BearerToken, when not empty, is sent with every call as
	// "authorization: Bearer TOKEN" (a server started with a token
	// requires it); see WithBearerToken.
	BearerToken string
}

// Dial connects to a fadeloop server at address: "host:port", or any gRPC
// target such as "dns:///fadeloop.example.internal:7443" (several
// addresses are balanced round_robin, see ServiceConfig). The connection is
// made lazily; the first call reports an unreachable server as
// codes.Unavailable (see IsUnreachable).
func Dial(address string, opts Options) (*Client, error) {
	if address == "" {
		return nil, errors.New("server address is empty")
	}
	tlsCfg, err := opts.TLS.Config()
	if err != nil {
		return nil, err
	}
	creds := insecure.NewCredentials()
	if tlsCfg != nil {
		creds = credentials.NewTLS(tlsCfg)
	}
	maxMsg := opts.MaxMessageBytes
	if maxMsg <= 0 {
		maxMsg = 16 << 20
	}
	dopts := []grpc.DialOption{
		grpc.WithTransportCredentials(creds),
		grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(maxMsg)),
	}
	if !opts.NoServiceConfig {
		dopts = append(dopts, grpc.WithDefaultServiceConfig(ServiceConfig))
	}
	if opts.BearerToken != "" {
		dopts = append(dopts, WithBearerToken(opts.BearerToken, tlsCfg != nil))
	}
	dopts = append(dopts, opts.DialOptions...)
	conn, err := grpc.NewClient(address, dopts...)
	if err != nil {
		return nil, fmt.Errorf("server address %q: %w", address, err)
	}
	return newClient(conn, opts.CallTimeout), nil
}

func newClient(conn *grpc.ClientConn, callTimeout time.Duration) *Client {
	return &Client{
		conn:        conn,
		channel:     pb.NewChannelServiceClient(conn),
		simulation:  pb.NewSimulationServiceClient(conn),
		loop:        pb.NewLoopServiceClient(conn),
		callTimeout: callTimeout,
	}
}

// Conn returns the underlying gRPC connection (for health checks or
// services this package has no helper for).
func (c *Client) Conn() *grpc.ClientConn { return c.conn }

// Close closes the connection (and stops the embedded server, if any).
func (c *Client) Close() error {
	err := c.conn.Close()
	if c.closeExtra != nil {
		c.closeExtra()
	}
	return err
}

// callContext applies the client's per-call timeout when ctx has no
// deadline.
func (c *Client) callContext(ctx context.Context) (context.Context, context.CancelFunc) {
	if _, ok := ctx.Deadline(); ok || c.callTimeout <= 0 {
		return context.WithCancel(ctx)
	}
	return context.WithTimeout(ctx, c.callTimeout)
}

// ServiceConfig is the gRPC service config the client uses unless
// Options.NoServiceConfig is set:
//
//   - round_robin load balancing, so that a name resolving to several
//     replicas (a DNS name with several A records, e.g. a Kubernetes
//     headless service) spreads calls over all of them;
//   - retries on UNAVAILABLE for the idempotent calls (StreamGains,
//     CheckChannel, Simulate, Sweep: every result is a pure function of the
//     request), up to 4 attempts with exponential back-off from 0.2 s to
//     2 s. gRPC retries a streaming call only until its first response has
//     arrived. Lockstep is stateful and never retried.
const ServiceConfig = `{
  "loadBalancingConfig": [{"round_robin": {}}],
  "methodConfig": [{
    "name": [
      {"service": "fadeloop.v1.ChannelService", "method": "StreamGains"},
      {"service": "fadeloop.v1.ChannelService", "method": "CheckChannel"},
      {"service": "fadeloop.v1.SimulationService", "method": "Simulate"},
      {"service": "fadeloop.v1.SimulationService", "method": "Sweep"},
      {"service": "fadeloop.v1.SimulationService", "method": "Tune"},
      {"service": "fadeloop.v1.SimulationService", "method": "Capacity"}
    ],
    "retryPolicy": {
      "maxAttempts": 4,
      "initialBackoff": "0.2s",
      "maxBackoff": "2s",
      "backoffMultiplier": 2,
      "retryableStatusCodes": ["UNAVAILABLE"]
    }
  }]
}`
