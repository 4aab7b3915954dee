package client

import (
	"context"

	"google.golang.org/grpc"
)

// WithBearerToken is a dial option that sends token with every call as
// "authorization: Bearer TOKEN" metadata (gRPC per-RPC credentials), for a
// server started with a token (fadeloopd -auth-token-file). With
// requireTLS the token is only sent over TLS; without it the token also
// goes over plaintext, which is acceptable on loopback only.
func WithBearerToken(token string, requireTLS bool) grpc.DialOption {
	return grpc.WithPerRPCCredentials(bearerToken{token: token, requireTLS: requireTLS})
}

// bearerToken implements credentials.PerRPCCredentials.
type bearerToken struct {
	token      string
	requireTLS bool
}

func (b bearerToken) GetRequestMetadata(context.Context, ...string) (map[string]string, error) {
	return map[string]string{"authorization": "Bearer " + b.token}, nil
}

func (b bearerToken) RequireTransportSecurity() bool { return b.requireTLS }

// String hides the token when the credentials are printed.
func (b bearerToken) String() string { return "bearerToken(redacted)" }
