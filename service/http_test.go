package service

import (
	"bufio"
	"bytes"
	"context"
	"encoding/binary"
	"encoding/json"
	"io"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// startHTTP serves srv's HTTP front on a real loopback listener.
func startHTTP(t *testing.T, env *testEnv) string {
	t.Helper()
	h, err := env.srv.HTTPHandler()
	if err != nil {
		t.Fatalf("HTTPHandler: %v", err)
	}
	hs := httptest.NewServer(h)
	t.Cleanup(hs.Close)
	return hs.URL
}

func jsonBody(t *testing.T, m proto.Message) []byte {
	t.Helper()
	b, err := protojson.MarshalOptions{UseProtoNames: true}.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func envelope(flags byte, b []byte) []byte {
	out := make([]byte, 5, 5+len(b))
	out[0] = flags
	binary.BigEndian.PutUint32(out[1:], uint32(len(b)))
	return append(out, b...)
}

// unenvelope splits a Connect or gRPC-Web body into its messages; the
// last element's flags tell whether it is the end-of-stream frame.
func unenvelope(t *testing.T, b []byte) (flags []byte, msgs [][]byte) {
	t.Helper()
	for len(b) > 0 {
		if len(b) < 5 {
			t.Fatalf("truncated envelope: %q", b)
		}
		n := int(binary.BigEndian.Uint32(b[1:5]))
		if len(b) < 5+n {
			t.Fatalf("truncated message")
		}
		flags = append(flags, b[0])
		msgs = append(msgs, b[5:5+n])
		b = b[5+n:]
	}
	return flags, msgs
}

func post(t *testing.T, url, ctype string, body []byte, hdr ...string) (*http.Response, []byte) {
	t.Helper()
	req, err := http.NewRequest(http.MethodPost, url, bytes.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	req.Header.Set("Content-Type", ctype)
	for i := 0; i+1 < len(hdr); i += 2 {
		req.Header.Set(hdr[i], hdr[i+1])
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatalf("POST %s: %v", url, err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return resp, b
}

// simulateReport runs req over gRPC and returns the report.
func simulateReport(t *testing.T, env *testEnv, req *pb.SimulateRequest) *pb.RunReport {
	t.Helper()
	st, err := env.sim.Simulate(context.Background(), req)
	if err != nil {
		t.Fatal(err)
	}
	msgs, err := drain(st.Recv)
	if err != nil {
		t.Fatal(err)
	}
	return msgs[len(msgs)-1].GetReport()
}

// sameFigures compares the deterministic part of two reports (the figures;
// timing fields differ between calls by design).
func sameFigures(t *testing.T, what string, got, want *pb.RunReport) {
	t.Helper()
	if got == nil {
		t.Fatalf("%s: no report", what)
	}
	if !proto.Equal(got.GetAggregate(), want.GetAggregate()) || len(got.GetUsers()) != len(want.GetUsers()) {
		t.Errorf("%s: figures differ from the gRPC call's\n got %v\nwant %v", what, got.GetAggregate(), want.GetAggregate())
	}
}

// TestHTTPSimulateRoutes calls Simulate through each HTTP way in (plain
// newline-delimited JSON, Connect streaming, gRPC-Web) over a loopback
// listener and checks the report equals the gRPC call's bit for bit.
func TestHTTPSimulateRoutes(t *testing.T) {
	env := startEnv(t, viaLoopback, Config{})
	base := startHTTP(t, env)
	req := &pb.SimulateRequest{Scenario: sweepBase(t)}
	want := simulateReport(t, env, req)
	body := jsonBody(t, req)

	t.Run("ndjson", func(t *testing.T) {
		resp, b := post(t, base+"/v1/simulate", "application/json", body)
		if resp.StatusCode != 200 || resp.Header.Get("Content-Type") != "application/x-ndjson" {
			t.Fatalf("status %d, type %q: %s", resp.StatusCode, resp.Header.Get("Content-Type"), b)
		}
		var last *pb.SimulateResponse
		sc := bufio.NewScanner(bytes.NewReader(b))
		sc.Buffer(nil, 16<<20)
		lines := 0
		for sc.Scan() {
			m := &pb.SimulateResponse{}
			if err := protojson.Unmarshal(sc.Bytes(), m); err != nil {
				t.Fatalf("line %d is not a SimulateResponse: %v: %.200s", lines, err, sc.Bytes())
			}
			last = m
			lines++
		}
		if lines < 1 {
			t.Fatal("no lines")
		}
		sameFigures(t, "ndjson", last.GetReport(), want)
	})
	for _, tc := range []struct{ name, ctype string }{
		{"connect", "application/connect+json"},
		{"grpc-web", "application/grpc-web+json"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			resp, b := post(t, base+"/fadeloop.v1.SimulationService/Simulate", tc.ctype, envelope(0, body))
			if resp.StatusCode != 200 {
				t.Fatalf("status %d: %s", resp.StatusCode, b)
			}
			flags, msgs := unenvelope(t, b)
			var rep *pb.RunReport
			for i, m := range msgs {
				if flags[i] != 0 {
					continue // end-of-stream (Connect) or trailers (gRPC-Web)
				}
				r := &pb.SimulateResponse{}
				if err := protojson.Unmarshal(m, r); err != nil {
					t.Fatalf("message %d: %v", i, err)
				}
				if r.GetReport() != nil {
					rep = r.GetReport()
				}
			}
			sameFigures(t, tc.name, rep, want)
		})
	}
}

// TestHTTPSweepStreamsPoints checks that a sweep's points arrive as one
// JSON line each, then the summary.
func TestHTTPSweepStreamsPoints(t *testing.T) {
	env := startEnv(t, viaLoopback, Config{})
	base := startHTTP(t, env)
	req := &pb.SweepRequest{Base: sweepBase(t), Axes: sweepAxes(), SeedMode: pb.SeedMode_SEED_MODE_COMMON}
	resp, err := http.Post(base+"/v1/sweep", "application/json", bytes.NewReader(jsonBody(t, req)))
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	if resp.StatusCode != 200 {
		b, _ := io.ReadAll(resp.Body)
		t.Fatalf("status %d: %s", resp.StatusCode, b)
	}
	seen := map[int64]bool{}
	var sum *pb.SweepSummary
	sc := bufio.NewScanner(resp.Body)
	sc.Buffer(nil, 16<<20)
	for sc.Scan() {
		m := &pb.SweepResponse{}
		if err := protojson.Unmarshal(sc.Bytes(), m); err != nil {
			t.Fatalf("line is not a SweepResponse: %v", err)
		}
		if sum != nil {
			t.Fatal("a line after the summary")
		}
		if p := m.GetPoint(); p != nil {
			seen[p.GetIndex()] = true
		}
		sum = m.GetSummary()
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	// 3 step sizes × 2 delays (sweepAxes).
	if len(seen) != 6 || sum == nil || sum.GetPointsComputed() != 6 {
		t.Fatalf("points %v, summary %v; want 6 points then a summary of 6", seen, sum)
	}
}

// TestHTTPErrors checks that bad input, unknown fields, the cost bound and
// oversized bodies get the same rulings as over gRPC, with HTTP statuses.
func TestHTTPErrors(t *testing.T) {
	env := startEnv(t, viaLoopback, Config{MaxCost: 1e6, MaxRecvMessageBytes: 64 << 10})
	base := startHTTP(t, env)
	bad := sweepBase(t)
	bad.Groups[0].Count = 0
	badBody := jsonBody(t, &pb.SimulateRequest{Scenario: bad})
	big := sweepBase(t)
	big.Run.Slots = 1_000_000
	bigBody := jsonBody(t, &pb.SimulateRequest{Scenario: big})
	cases := []struct {
		name, path, ctype string
		body              []byte
		hdr               []string
		status            int
		code, mention     string
	}{
		{"ndjson field violation", "/v1/simulate", "application/json", badBody, nil, 400, "invalid_argument", "scenario.groups[0].count"},
		{"ndjson unknown field", "/v1/simulate", "application/json", []byte(`{"slots": 5}`), nil, 400, "invalid_argument", "unknown field"},
		{"ndjson malformed", "/v1/sweep", "application/json", []byte(`{"base": `), nil, 400, "invalid_argument", "SweepRequest"},
		{"ndjson cost bound", "/v1/simulate", "application/json", bigBody, nil, 429, "resource_exhausted", "cost"},
		{"ndjson too large", "/v1/simulate", "application/json", bytes.Repeat([]byte(" "), 70<<10), nil, 413, "resource_exhausted", "larger than"},
		{"rest check, no channel", "/v1/channel:check", "application/json", []byte(`{}`), nil, 400, "", "channel"},
		{"connect unary, bad links", "/fadeloop.v1.ChannelService/CheckChannel", "application/json",
			[]byte(`{"channel":{"doppler_hz":50,"sample_rate_hz":1500,"profile":"FLAT","generator":"GENERATOR_DEFAULT"},"links":3}`),
			[]string{"Connect-Protocol-Version", "1"}, 400, "invalid_argument", "links"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			resp, b := post(t, base+tc.path, tc.ctype, tc.body, tc.hdr...)
			if resp.StatusCode != tc.status {
				t.Fatalf("status %d, want %d: %s", resp.StatusCode, tc.status, b)
			}
			var e struct {
				Code any `json:"code"`
			}
			if err := json.Unmarshal(b, &e); err != nil {
				t.Fatalf("error body is not JSON: %v: %s", err, b)
			}
			if tc.code != "" && e.Code != tc.code {
				t.Errorf("code %v, want %s", e.Code, tc.code)
			}
			if !strings.Contains(string(b), tc.mention) {
				t.Errorf("error does not mention %q: %s", tc.mention, b)
			}
		})
	}
}

// TestHTTPCheckChannelREST calls the unary CheckChannel on its REST route.
func TestHTTPCheckChannelREST(t *testing.T) {
	env := startEnv(t, viaLoopback, Config{})
	base := startHTTP(t, env)
	body := []byte(`{"channel":{"doppler_hz":55.59,"sample_rate_hz":1500,"profile":"FLAT","generator":"GENERATOR_DEFAULT"},"links":16,"doppler_periods":40}`)
	resp, b := post(t, base+"/v1/channel:check", "application/json", body)
	if resp.StatusCode != 200 {
		t.Fatalf("status %d: %s", resp.StatusCode, b)
	}
	m := &pb.CheckChannelResponse{}
	if err := protojson.Unmarshal(b, m); err != nil {
		t.Fatalf("not a CheckChannelResponse: %v", err)
	}
	if len(m.GetLines()) == 0 {
		t.Fatal("no check lines")
	}
	resp, err := http.Get(base + "/healthz")
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != 200 {
		t.Errorf("/healthz: status %d", resp.StatusCode)
	}
}

// TestHTTPAdmissionAndCancel: an HTTP call takes a run slot like a gRPC
// call (a full server turns it away with 429), and a client that goes away
// cancels the computation on the server.
func TestHTTPAdmissionAndCancel(t *testing.T) {
	gate := make(chan struct{})
	entered := make(chan struct{}, 4)
	ended := make(chan error, 4)
	cfg := Config{MaxConcurrentRuns: 1, QueueLength: -1}
	cfg.testHook = func(ctx context.Context, _ string) {
		entered <- struct{}{}
		select {
		case <-gate:
			ended <- nil
		case <-ctx.Done():
			ended <- ctx.Err()
		}
	}
	env := startEnv(t, viaLoopback, cfg)
	base := startHTTP(t, env)
	body := jsonBody(t, &pb.SimulateRequest{Scenario: sweepBase(t)})

	// 1. A gRPC call holds the only run slot: the HTTP call is turned away.
	grpcDone := make(chan error, 1)
	go func() {
		st, err := env.sim.Simulate(context.Background(), &pb.SimulateRequest{Scenario: sweepBase(t)})
		if err == nil {
			_, err = drain(st.Recv)
		}
		grpcDone <- err
	}()
	<-entered
	resp, b := post(t, base+"/v1/simulate", "application/json", body)
	if resp.StatusCode != http.StatusTooManyRequests || !strings.Contains(string(b), "resource_exhausted") {
		t.Fatalf("with the run slot taken: status %d %s, want 429 resource_exhausted", resp.StatusCode, b)
	}
	close(gate)
	if err := <-grpcDone; err != nil {
		t.Fatalf("the gRPC call failed: %v", err)
	}
	<-ended

	// 2. An HTTP call whose client goes away is cancelled on the server.
	gate2 := make(chan struct{}) // never opened
	cfg2 := Config{}
	cfg2.testHook = func(ctx context.Context, _ string) {
		entered <- struct{}{}
		select {
		case <-gate2:
			ended <- nil
		case <-ctx.Done():
			ended <- ctx.Err()
		}
	}
	env2 := startEnv(t, viaLoopback, cfg2)
	base2 := startHTTP(t, env2)
	ctx, cancel := context.WithCancel(context.Background())
	req, _ := http.NewRequestWithContext(ctx, http.MethodPost, base2+"/v1/simulate", bytes.NewReader(body))
	req.Header.Set("Content-Type", "application/json")
	errc := make(chan error, 1)
	go func() {
		resp, err := http.DefaultClient.Do(req)
		if err == nil {
			_, err = io.ReadAll(resp.Body)
			resp.Body.Close()
		}
		errc <- err
	}()
	<-entered
	cancel()
	if err := <-ended; err == nil {
		t.Fatal("the server's call was not cancelled when the HTTP client went away")
	}
	<-errc
}
