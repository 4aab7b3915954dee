package service

import (
	"bytes"
	"context"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"strings"
	"time"

	"connectrpc.com/vanguard"
	"connectrpc.com/vanguard/vanguardgrpc"
	"google.golang.org/genproto/googleapis/api/annotations"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/reflect/protoreflect"
	"google.golang.org/protobuf/reflect/protoregistry"
	"google.golang.org/protobuf/types/dynamicpb"
)

// HTTP/JSON front of the API. Every route ends in the same gRPC handlers as
// the gRPC listener (through grpc.Server.ServeHTTP), so validation, the cost
// bound, admission control, deadlines, logging and metrics apply unchanged.
//
// Three ways in, all JSON over HTTP/1.1 or HTTP/2:
//
//   - Connect protocol, every RPC: POST /fadeloop.v1.<Service>/<Method>.
//     Unary calls take a plain JSON body (Content-Type: application/json);
//     server streams take and return enveloped messages
//     (Content-Type: application/connect+json, 5-byte prefix per message).
//   - gRPC-Web (application/grpc-web+json or +proto), every RPC, for browsers.
//   - Plain routes under /v1/ for curl and scripts: a JSON request body and,
//     for the server streams, newline-delimited JSON (one response message
//     per line, flushed as it is produced; a failure after the first line
//     ends the stream with a line {"error": {...}}). See httpRoutes.
//
// JSON field names are the proto field names (step_db, update_rate_hz), as in
// scenario files; unknown fields are rejected, as they are in scenario files;
// zero values are written out (a point of index 0 has "index": "0").

// httpRoute is one plain /v1/ route and the RPC behind it.
type httpRoute struct {
	Path      string // e.g. "/v1/simulate"
	Procedure string // e.g. "/fadeloop.v1.SimulationService/Simulate"
	Stream    bool   // server stream: newline-delimited JSON response
}

// httpRoutes are the plain routes. CheckChannel is unary and is served by
// the transcoder's REST support; the server streams go through the
// newline-delimited JSON adapter (vanguard v0.4 serves REST server streams
// only for google.api.HttpBody responses). Lockstep (a bidirectional stream)
// needs HTTP/2 and is left to gRPC and Connect clients.
var httpRoutes = []httpRoute{
	{Path: "/v1/channel:check", Procedure: "/fadeloop.v1.ChannelService/CheckChannel"},
	{Path: "/v1/channel:gains", Procedure: "/fadeloop.v1.ChannelService/StreamGains", Stream: true},
	{Path: "/v1/simulate", Procedure: "/fadeloop.v1.SimulationService/Simulate", Stream: true},
	{Path: "/v1/sweep", Procedure: "/fadeloop.v1.SimulationService/Sweep", Stream: true},
	{Path: "/v1/tune", Procedure: "/fadeloop.v1.SimulationService/Tune", Stream: true},
	{Path: "/v1/capacity", Procedure: "/fadeloop.v1.SimulationService/Capacity", Stream: true},
}

// HTTPHandler returns the HTTP/JSON front of s (Connect, gRPC-Web and the
// plain /v1/ routes; see the package comment of this file). Mount it on its
// own listener (DaemonOptions.HTTPListen). Request bodies above
// Config.MaxRecvMessageBytes are refused.
func (s *Server) HTTPHandler() (http.Handler, error) {
	limit := uint32(s.cfg.MaxRecvMessageBytes)
	newCodec := func(res vanguard.TypeResolver) vanguard.Codec {
		return &vanguard.JSONCodec{
			MarshalOptions:   protojson.MarshalOptions{Resolver: res, UseProtoNames: true, EmitUnpopulated: true},
			UnmarshalOptions: protojson.UnmarshalOptions{Resolver: res},
		}
	}
	var rules []*annotations.HttpRule
	for _, r := range httpRoutes {
		if r.Stream {
			continue
		}
		sel := strings.ReplaceAll(strings.TrimPrefix(r.Procedure, "/"), "/", ".")
		rules = append(rules, &annotations.HttpRule{
			Selector: sel,
			Pattern:  &annotations.HttpRule_Post{Post: r.Path},
			Body:     "*",
		})
	}
	mux := http.NewServeMux()
	tc, err := vanguardgrpc.NewTranscoder(s.grpc,
		vanguard.WithCodec(newCodec),
		vanguard.WithRules(rules...),
		vanguard.WithDefaultServiceOptions(vanguard.WithMaxMessageBufferBytes(limit)),
		vanguard.WithUnknownHandler(mux),
	)
	if err != nil {
		return nil, fmt.Errorf("HTTP front: %w", err)
	}
	for _, r := range httpRoutes {
		if r.Stream {
			mux.Handle("POST "+r.Path, &ndjsonStream{next: tc, procedure: r.Procedure, limit: int64(limit)})
		}
	}
	mux.HandleFunc("GET /healthz", func(w http.ResponseWriter, _ *http.Request) {
		if s.draining.Load() {
			http.Error(w, "draining", http.StatusServiceUnavailable)
			return
		}
		io.WriteString(w, "ok\n")
	})
	return http.MaxBytesHandler(tc, int64(limit)+(64<<10)), nil
}

// ndjsonStream turns a plain JSON POST into a Connect server-stream call on
// next and writes each response message as one line of JSON.
type ndjsonStream struct {
	next      http.Handler
	procedure string
	limit     int64
}

const (
	connectFlagEnd = 0x02 // Connect end-of-stream envelope
	envelopeHeader = 5
)

func (h *ndjsonStream) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	body, err := io.ReadAll(io.LimitReader(r.Body, h.limit+1))
	if err != nil {
		writeHTTPError(w, http.StatusBadRequest, "invalid_argument", "reading the request body: "+err.Error())
		return
	}
	if int64(len(body)) > h.limit {
		writeHTTPError(w, http.StatusRequestEntityTooLarge, "resource_exhausted",
			fmt.Sprintf("request body is larger than %d bytes", h.limit))
		return
	}
	if len(bytes.TrimSpace(body)) == 0 {
		body = []byte("{}")
	}
	if err := h.checkJSON(body); err != nil {
		writeHTTPError(w, http.StatusBadRequest, "invalid_argument", err.Error())
		return
	}
	env := make([]byte, envelopeHeader, envelopeHeader+len(body))
	binary.BigEndian.PutUint32(env[1:], uint32(len(body)))
	env = append(env, body...)
	inner, err := http.NewRequestWithContext(r.Context(), http.MethodPost, h.procedure, bytes.NewReader(env))
	if err != nil {
		writeHTTPError(w, http.StatusInternalServerError, "internal", err.Error())
		return
	}
	inner.Header.Set("Content-Type", "application/connect+json")
	inner.Header.Set("Connect-Protocol-Version", "1")
	if t := r.Header.Get("Connect-Timeout-Ms"); t != "" {
		inner.Header.Set("Connect-Timeout-Ms", t)
	}
	inner.RemoteAddr = r.RemoteAddr
	rw := &envelopeWriter{w: w, header: http.Header{}}
	rw.flusher, _ = w.(http.Flusher)
	h.next.ServeHTTP(rw, inner)
	rw.finish()
}

// checkJSON decodes body as the RPC's request message, so that malformed
// JSON and unknown fields get invalid_argument with the decoder's message
// (line and field) before any call is made.
func (h *ndjsonStream) checkJSON(body []byte) error {
	parts := strings.Split(strings.TrimPrefix(h.procedure, "/"), "/")
	sd, err := protoregistry.GlobalFiles.FindDescriptorByName(protoreflect.FullName(parts[0]))
	if err != nil {
		return nil // unknown here: the transcoder will say so
	}
	svc, ok := sd.(protoreflect.ServiceDescriptor)
	if !ok {
		return nil
	}
	md := svc.Methods().ByName(protoreflect.Name(parts[1]))
	if md == nil {
		return nil
	}
	msg := dynamicpb.NewMessage(md.Input())
	if err := protojson.Unmarshal(body, msg); err != nil {
		return fmt.Errorf("request body (%s): %v", md.Input().Name(), err)
	}
	return nil
}

// envelopeWriter receives a Connect streaming response and writes its
// messages to w as newline-delimited JSON. The HTTP status is chosen at the
// first message: 200 when a message comes first, the error's status when
// the stream ends at once with an error.
type envelopeWriter struct {
	w       http.ResponseWriter
	flusher http.Flusher
	header  http.Header
	status  int
	buf     []byte
	started bool
	ended   bool
}

func (e *envelopeWriter) Header() http.Header { return e.header }

func (e *envelopeWriter) WriteHeader(code int) {
	if e.status == 0 {
		e.status = code
	}
}

func (e *envelopeWriter) Flush() {}

func (e *envelopeWriter) Write(p []byte) (int, error) {
	if e.status == 0 {
		e.status = http.StatusOK
	}
	if e.status != http.StatusOK {
		// Not a stream (e.g. an unsupported content type): pass on as is.
		e.buf = append(e.buf, p...)
		return len(p), nil
	}
	e.buf = append(e.buf, p...)
	for len(e.buf) >= envelopeHeader {
		n := int(binary.BigEndian.Uint32(e.buf[1:envelopeHeader]))
		if len(e.buf) < envelopeHeader+n {
			break
		}
		flags, msg := e.buf[0], e.buf[envelopeHeader:envelopeHeader+n]
		if flags&connectFlagEnd != 0 {
			e.end(msg)
		} else {
			e.line(msg)
		}
		e.buf = e.buf[envelopeHeader+n:]
	}
	return len(p), nil
}

func (e *envelopeWriter) start(code int) {
	if e.started {
		return
	}
	e.started = true
	e.w.Header().Set("Content-Type", "application/x-ndjson")
	e.w.Header().Set("X-Content-Type-Options", "nosniff")
	e.w.WriteHeader(code)
}

func (e *envelopeWriter) line(msg []byte) {
	e.start(http.StatusOK)
	e.w.Write(msg)
	e.w.Write([]byte("\n"))
	if e.flusher != nil {
		e.flusher.Flush()
	}
}

// end handles the Connect end-of-stream message {"error": {...}} or {}.
func (e *envelopeWriter) end(msg []byte) {
	e.ended = true
	var end struct {
		Error json.RawMessage `json:"error"`
	}
	if json.Unmarshal(msg, &end) != nil || len(end.Error) == 0 {
		e.start(http.StatusOK)
		return
	}
	if !e.started {
		var ce struct {
			Code string `json:"code"`
		}
		_ = json.Unmarshal(end.Error, &ce)
		e.w.Header().Set("Content-Type", "application/json")
		e.started = true
		e.w.WriteHeader(httpStatusOfCode(ce.Code))
		e.w.Write(end.Error)
		e.w.Write([]byte("\n"))
		return
	}
	e.w.Write([]byte(`{"error":`))
	e.w.Write(end.Error)
	e.w.Write([]byte("}\n"))
}

func (e *envelopeWriter) finish() {
	switch {
	case e.status != 0 && e.status != http.StatusOK:
		for k, v := range e.header {
			e.w.Header()[k] = v
		}
		e.started = true
		e.w.WriteHeader(e.status)
		e.w.Write(e.buf)
	case !e.ended:
		writeHTTPError(e.w, http.StatusInternalServerError, "internal", "the stream ended without an end message")
	}
}

// writeHTTPError writes a Connect-style JSON error {"code": ..., "message": ...}.
func writeHTTPError(w http.ResponseWriter, status int, code, msg string) {
	w.Header().Set("Content-Type", "application/json")
	w.WriteHeader(status)
	b, _ := json.Marshal(map[string]string{"code": code, "message": msg})
	w.Write(append(b, '\n'))
}

// httpStatusOfCode maps a Connect error code to its HTTP status, as the
// Connect protocol specification's error-code table does.
func httpStatusOfCode(code string) int {
	switch code {
	case "canceled":
		return 499
	case "invalid_argument", "out_of_range", "failed_precondition":
		return http.StatusBadRequest
	case "deadline_exceeded":
		return http.StatusGatewayTimeout
	case "not_found":
		return http.StatusNotFound
	case "already_exists", "aborted":
		return http.StatusConflict
	case "permission_denied":
		return http.StatusForbidden
	case "resource_exhausted":
		return http.StatusTooManyRequests
	case "unimplemented":
		return http.StatusNotImplemented
	case "unavailable":
		return http.StatusServiceUnavailable
	case "unauthenticated":
		return http.StatusUnauthorized
	default:
		return http.StatusInternalServerError
	}
}

// serveHTTPFront listens on addr and serves srv.HTTPHandler there (with the
// server's TLS configuration, if any) until the returned stop is called.
func serveHTTPFront(srv *Server, addr string, logger *slog.Logger) (stop func(), err error) {
	h, err := srv.HTTPHandler()
	if err != nil {
		return nil, err
	}
	lis, err := net.Listen("tcp", addr)
	if err != nil {
		return nil, fmt.Errorf("http listen %s: %w", addr, err)
	}
	hs := &http.Server{Handler: h, ReadHeaderTimeout: 10 * time.Second, TLSConfig: srv.Config().TLS}
	go func() {
		var err error
		if hs.TLSConfig != nil {
			err = hs.ServeTLS(lis, "", "")
		} else {
			err = hs.Serve(lis)
		}
		if err != nil && !errors.Is(err, http.ErrServerClosed) {
			logger.Error("http listener failed", slog.String("error", err.Error()))
		}
	}()
	logger.Info("http listening", slog.String("http_addr", lis.Addr().String()))
	return func() {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		_ = hs.Shutdown(ctx)
	}, nil
}
