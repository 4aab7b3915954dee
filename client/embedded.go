package client

import (
	"context"
	"fmt"
	"net"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/test/bufconn"

	"github.com/fadeloop/fadeloop/service"
)

// embeddedBufferBytes is the in-memory pipe buffer of the embedded
// connection.
const embeddedBufferBytes = 4 << 20

// Embedded starts the fadeloop service inside this process, connected
// through an in-memory pipe (no port is opened), and returns a client for
// it. cfg configures the server as for fadeloopd (zero value: defaults).
// Closing the client stops the server, cancelling calls still running.
//
// It is what the CLI uses when no --server address is given, and what
// tests use to compare the embedded and remote modes.
func Embedded(cfg service.Config, opts Options) (*Client, error) {
	srv, err := service.NewServer(cfg)
	if err != nil {
		return nil, err
	}
	lis := bufconn.Listen(embeddedBufferBytes)
	served := make(chan error, 1)
	go func() { served <- srv.Serve(lis) }()
	maxMsg := opts.MaxMessageBytes
	if maxMsg <= 0 {
		maxMsg = srv.Config().MaxSendMessageBytes
	}
	dopts := []grpc.DialOption{
		grpc.WithContextDialer(func(ctx context.Context, _ string) (net.Conn, error) {
			return lis.DialContext(ctx)
		}),
		grpc.WithTransportCredentials(insecure.NewCredentials()),
		grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(maxMsg)),
	}
	dopts = append(dopts, opts.DialOptions...)
	// "passthrough" hands the name to the dialer unresolved.
	conn, err := grpc.NewClient("passthrough:///fadeloop-embedded", dopts...)
	if err != nil {
		srv.Stop()
		return nil, fmt.Errorf("embedded server: %w", err)
	}
	c := newClient(conn, opts.CallTimeout)
	c.closeExtra = func() {
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		defer cancel()
		_ = srv.Shutdown(ctx)
		<-served
		_ = lis.Close()
	}
	return c, nil
}
