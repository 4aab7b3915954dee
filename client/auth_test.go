package client

import (
	"fmt"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"github.com/fadeloop/fadeloop/service"
)

// A server started with a token refuses calls without it and serves a
// client dialled with Options.BearerToken.
func TestBearerTokenOption(t *testing.T) {
	const token = "client-side-test-token"
	req := &pb.CheckChannelRequest{Channel: &pb.ChannelSpec{DopplerHz: 10, SampleRateHz: 1500, Profile: "EPA",
		Generator: pb.Generator_GENERATOR_DEFAULT}, Links: 8, DopplerPeriods: 20, Seed: 1}
	without, addr := remote(t, quiet(service.Config{AuthToken: token}), Options{})
	if _, err := without.CheckChannel(ctxT(t), req); status.Code(err) != codes.Unauthenticated {
		t.Fatalf("without token: %v, want Unauthenticated", err)
	}
	with, err := Dial(addr, Options{BearerToken: token})
	if err != nil {
		t.Fatal(err)
	}
	defer with.Close()
	if _, err := with.CheckChannel(ctxT(t), req); err != nil {
		t.Fatalf("with token: %v", err)
	}
	if s := fmt.Sprint(bearerToken{token: token}); strings.Contains(s, token) {
		t.Errorf("credentials print the token: %s", s)
	}
}
