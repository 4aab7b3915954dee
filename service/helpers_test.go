package service

import (
	"context"
	"errors"
	"go/ast"
	"go/parser"
	"go/token"
	"io"
	"io/fs"
	"log/slog"
	"math"
	"net"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"
	"google.golang.org/grpc/test/bufconn"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// transport is how a test reaches the server: in memory or over loopback.
type transport string

const (
	viaBufconn  transport = "bufconn"
	viaLoopback transport = "loopback"
)

var transports = []transport{viaBufconn, viaLoopback}

// testEnv is a running server with clients of every service.
type testEnv struct {
	srv      *Server
	conn     *grpc.ClientConn
	channel  pb.ChannelServiceClient
	sim      pb.SimulationServiceClient
	loop     pb.LoopServiceClient
	logs     *syncBuffer
	serveErr chan error
}

// syncBuffer collects log output safely across goroutines.
type syncBuffer struct {
	mu sync.Mutex
	b  strings.Builder
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// startEnv starts a server with cfg on the given transport and dials it.
// The server is stopped at the end of the test.
func startEnv(t testing.TB, tr transport, cfg Config, dialOpts ...grpc.DialOption) *testEnv {
	t.Helper()
	logs := &syncBuffer{}
	if cfg.Logger == nil {
		cfg.Logger = slog.New(slog.NewJSONHandler(logs, &slog.HandlerOptions{Level: slog.LevelDebug}))
	}
	srv, err := NewServer(cfg)
	if err != nil {
		t.Fatalf("NewServer: %v", err)
	}
	var lis net.Listener
	var target string
	opts := []grpc.DialOption{
		grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(64 << 20)),
		grpc.WithInitialWindowSize(4 << 20),
		grpc.WithInitialConnWindowSize(8 << 20),
	}
	switch tr {
	case viaBufconn:
		bl := bufconn.Listen(4 << 20)
		lis = bl
		target = "passthrough:///bufnet"
		opts = append(opts, grpc.WithContextDialer(func(ctx context.Context, _ string) (net.Conn, error) {
			return bl.DialContext(ctx)
		}))
	case viaLoopback:
		l, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			t.Fatalf("listen: %v", err)
		}
		lis = l
		target = l.Addr().String()
	}
	if len(dialOpts) == 0 {
		opts = append(opts, grpc.WithTransportCredentials(insecure.NewCredentials()))
	}
	opts = append(opts, dialOpts...)
	env := &testEnv{srv: srv, logs: logs, serveErr: make(chan error, 1)}
	go func() { env.serveErr <- srv.Serve(lis) }()
	conn, err := grpc.NewClient(target, opts...)
	if err != nil {
		t.Fatalf("dial: %v", err)
	}
	env.conn = conn
	env.channel = pb.NewChannelServiceClient(conn)
	env.sim = pb.NewSimulationServiceClient(conn)
	env.loop = pb.NewLoopServiceClient(conn)
	t.Cleanup(func() {
		conn.Close()
		srv.Stop()
		select {
		case <-env.serveErr:
		case <-time.After(5 * time.Second):
			t.Errorf("Serve did not return after Stop")
		}
	})
	return env
}

// wantCode fails unless err carries code c.
func wantCode(t testing.TB, err error, c codes.Code) *status.Status {
	t.Helper()
	st, ok := status.FromError(err)
	if !ok {
		t.Fatalf("error %v is not a status (want %v)", err, c)
	}
	if st.Code() != c {
		t.Fatalf("code %v (%s), want %v", st.Code(), st.Message(), c)
	}
	return st
}

// badRequestFields returns the field paths of st's BadRequest detail.
func badRequestFields(st *status.Status) map[string]string {
	out := map[string]string{}
	for _, d := range st.Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			for _, fv := range br.GetFieldViolations() {
				out[fv.GetField()] = fv.GetDescription()
			}
		}
	}
	return out
}

// wantInvalid fails unless err is INVALID_ARGUMENT whose BadRequest names
// field (exactly).
func wantInvalid(t testing.TB, err error, field string) {
	t.Helper()
	st := wantCode(t, err, codes.InvalidArgument)
	fields := badRequestFields(st)
	if _, ok := fields[field]; !ok {
		t.Fatalf("BadRequest does not name %q; it names %v", field, fields)
	}
}

// drain reads a server stream to its end and returns the messages and the
// final error (nil on a clean end).
func drain[T any](recv func() (*T, error)) ([]*T, error) {
	var out []*T
	for {
		m, err := recv()
		if errors.Is(err, io.EOF) {
			return out, nil
		}
		if err != nil {
			return out, err
		}
		out = append(out, m)
	}
}

// TestOnlyServiceCreatesStatuses enforces the design rule "only service
// speaks status codes": outside package service (and the generated gRPC
// stubs, whose Unimplemented handlers are grpc's own), no non-test file may
// import google.golang.org/grpc/status or codes, except the client, which
// may read statuses (status.FromError, status.Convert, codes.X) but not
// create them (status.New, Newf, Error, Errorf, FromProto, ErrorProto).
func TestOnlyServiceCreatesStatuses(t *testing.T) {
	const (
		statusPkg = "google.golang.org/grpc/status"
		codesPkg  = "google.golang.org/grpc/codes"
	)
	creators := map[string]bool{"New": true, "Newf": true, "Error": true, "Errorf": true, "FromProto": true, "ErrorProto": true}
	root := ".."
	checked := 0
	err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(root, path)
		if d.IsDir() {
			if rel == "service" || (rel != "." && strings.HasPrefix(d.Name(), ".")) || d.Name() == "testdata" {
				return filepath.SkipDir
			}
			return nil
		}
		if !strings.HasSuffix(path, ".go") || strings.HasSuffix(path, "_test.go") || strings.HasSuffix(path, "_grpc.pb.go") {
			return nil
		}
		f, err := parser.ParseFile(token.NewFileSet(), path, nil, parser.ImportsOnly)
		if err != nil {
			return err
		}
		checked++
		statusName := ""
		for _, imp := range f.Imports {
			p, _ := strconv.Unquote(imp.Path.Value)
			if p != statusPkg && p != codesPkg {
				continue
			}
			if !strings.HasPrefix(filepath.ToSlash(rel), "client/") {
				t.Errorf("%s imports %s: only package service speaks gRPC status codes", rel, p)
			}
			if p == statusPkg {
				statusName = "status"
				if imp.Name != nil {
					statusName = imp.Name.Name
				}
			}
		}
		if statusName == "" {
			return nil
		}
		full, err := parser.ParseFile(token.NewFileSet(), path, nil, 0)
		if err != nil {
			return err
		}
		ast.Inspect(full, func(n ast.Node) bool {
			if sel, ok := n.(*ast.SelectorExpr); ok {
				if id, ok := sel.X.(*ast.Ident); ok && id.Name == statusName && creators[sel.Sel.Name] {
					t.Errorf("%s calls %s.%s: the client may read statuses, not create them", rel, statusName, sel.Sel.Name)
				}
			}
			return true
		})
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if checked < 50 {
		t.Fatalf("checked only %d files: the walk missed the module", checked)
	}
}

// TestDomainPathsToAPIPaths checks the one mapping from domain error paths
// to request paths (violationsOf, apiPath): fading parameters arrive as
// snake_case API paths, loop and tune paths get the request prefix, the
// engine's trace options move to "traces.".
func TestDomainPathsToAPIPaths(t *testing.T) {
	ok := fading.ChannelConfig{DopplerHz: 10, SampleRateHz: 1500, Profile: fading.Profile{Taps: []fading.Tap{{DelayNs: 0, PowerDB: 0}}}}
	if err := ok.Validate(); err != nil {
		t.Fatalf("valid channel rejected: %v", err)
	}
	bad := func(f func(*fading.ChannelConfig)) error {
		c := ok
		c.Profile.Taps = append([]fading.Tap(nil), ok.Profile.Taps...)
		f(&c)
		return c.Validate()
	}
	tests := []struct {
		name   string
		err    error
		prefix string
		want   string
	}{
		{"fading Doppler", bad(func(c *fading.ChannelConfig) { c.DopplerHz = 1000 }), "channel.", "channel.doppler_hz"},
		{"fading Rician K", bad(func(c *fading.ChannelConfig) { c.LOS, c.RicianKDB = true, 1e6 }), "", "rician_k_db"},
		{"fading tap delay", bad(func(c *fading.ChannelConfig) { c.Profile.Taps[0].DelayNs = math.NaN() }), "", "profile.taps[0].delay_ns"},
		{"loop scenario field", loop.Violations{{Field: "groups[0].count", Rule: "r"}}, "scenario.", "scenario.groups[0].count"},
		{"loop trace option", loop.Violations{{Field: "trace.users[3]", Rule: "r"}}, "scenario.", "traces.users[3]"},
		{"tune request field", loop.Violations{{Field: "axes[1].first", Rule: "r"}}, "", "axes[1].first"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			vs, ok := violationsOf(tc.err, tc.prefix)
			if !ok || len(vs) != 1 || vs[0].Field != tc.want {
				t.Errorf("violationsOf(%v) = %v, %v; want field %q", tc.err, vs, ok, tc.want)
			}
		})
	}
	if _, ok := violationsOf(errors.New("plain"), ""); ok {
		t.Error("a plain error counted as field violations")
	}
}
