package service

import (
	"context"
	"crypto/sha256"
	"crypto/subtle"
	"fmt"
	"log/slog"
	"runtime/debug"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/grpc-ecosystem/go-grpc-middleware/v2/interceptors/recovery"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/encoding"
	protocodec "google.golang.org/grpc/encoding/proto"
	"google.golang.org/grpc/mem"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/peer"
	"google.golang.org/grpc/status"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// callInfo collects what a handler learns about its call for the log line.
type callInfo struct {
	cost      atomic.Int64 // tap-slots of the request, once known
	userSlots atomic.Int64 // user-slots simulated
	// abort ends a streaming call from the server side with the given
	// status error (see endStream); nil outside a stream or in a unary call.
	abort context.CancelCauseFunc
	// detached is set when the stream was ended while its handler was
	// still blocked (in Send or Recv on a client that stopped reading or
	// sending); the handler returns once the stream is closed.
	detached atomic.Bool
}

type callInfoKey struct{}

// infoFrom returns the call's info, or a throwaway one outside a call.
func infoFrom(ctx context.Context) *callInfo {
	if ci, ok := ctx.Value(callInfoKey{}).(*callInfo); ok {
		return ci
	}
	return &callInfo{}
}

// serverStream replaces a stream's context.
type serverStream struct {
	grpc.ServerStream
	ctx context.Context
}

func (s *serverStream) Context() context.Context { return s.ctx }

// RecvMsg maps undecodable message bytes to INVALID_ARGUMENT (see
// lenientCodec).
func (s *serverStream) RecvMsg(m any) error {
	if err := s.ServerStream.RecvMsg(m); err != nil {
		return err
	}
	return takeDecodeError(m)
}

// logCall writes one structured line per call: method, code, duration,
// cost and simulated user-slots, and the peer.
//
// The level is ERROR only for failures on the server's side (INTERNAL,
// UNKNOWN, ...). Endings caused by the client (cancel, deadline,
// disconnect: clientEnded) and rejections of its input or of load are INFO
// or WARN, so that garbage traffic cannot drive error alerts.
func logCall(l *slog.Logger, ctx context.Context, method string, start time.Time, ci *callInfo, err error, clientEnded bool) {
	st := status.Convert(err)
	level := callLogLevel(st.Code(), clientEnded)
	attrs := []slog.Attr{
		slog.String("method", method),
		slog.String("code", st.Code().String()),
		slog.Duration("duration", time.Since(start)),
		slog.Int64("cost_tap_slots", ci.cost.Load()),
	}
	if us := ci.userSlots.Load(); us > 0 {
		attrs = append(attrs, slog.Int64("user_slots", us))
	}
	if p, ok := peer.FromContext(ctx); ok && p.Addr != nil {
		attrs = append(attrs, slog.String("peer", p.Addr.String()))
	}
	if err != nil {
		attrs = append(attrs, slog.String("error", st.Message()))
	}
	if clientEnded && err != nil {
		attrs = append(attrs, slog.Bool("client_ended", true))
	}
	if ci.detached.Load() {
		attrs = append(attrs, slog.Bool("stream_cut", true))
	}
	l.LogAttrs(ctx, level, "rpc", attrs...)
}

// callLogLevel is the level of a call's log line (see logCall).
func callLogLevel(c codes.Code, clientEnded bool) slog.Level {
	switch {
	case c == codes.OK, clientEnded:
		return slog.LevelInfo
	}
	switch c {
	case codes.Canceled, codes.InvalidArgument, codes.ResourceExhausted,
		codes.DeadlineExceeded, codes.NotFound, codes.OutOfRange:
		return slog.LevelInfo
	case codes.Unauthenticated, codes.PermissionDenied, codes.Unavailable, codes.FailedPrecondition:
		return slog.LevelWarn
	}
	return slog.LevelError
}

// loggingUnary and loggingStream install the call info and log each call.
// They also cap the call's deadline at maxCall.
func loggingUnary(l *slog.Logger, maxCall time.Duration) grpc.UnaryServerInterceptor {
	return func(ctx context.Context, req any, info *grpc.UnaryServerInfo, h grpc.UnaryHandler) (any, error) {
		start := time.Now()
		ci := &callInfo{}
		callCtx, cancel := context.WithTimeoutCause(context.WithValue(ctx, callInfoKey{}, ci), maxCall, callTooLong(maxCall))
		defer cancel()
		resp, err := h(callCtx, req)
		if err != nil && callCtx.Err() != nil && ctx.Err() == nil {
			err = causeStatus(callCtx, err)
		}
		logCall(l, callCtx, info.FullMethod, start, ci, err, ctx.Err() != nil)
		return resp, err
	}
}

// callTooLong is the status of a call cut at the server's call-duration cap.
func callTooLong(maxCall time.Duration) error {
	return status.Errorf(codes.DeadlineExceeded, "call ran past the server's maximum call duration %s (max_call_duration)", maxCall)
}

// causeStatus returns the status error that ended ctx (a deadline cap, an
// idle timeout, a drain) when there is one, else err.
func causeStatus(ctx context.Context, err error) error {
	if c := context.Cause(ctx); c != nil {
		if _, ok := status.FromError(c); ok {
			return c
		}
	}
	return err
}

// loggingStream is loggingUnary for streams. Besides capping the deadline
// it can end a stream whose handler is blocked: a handler waiting in Send
// for a client that stopped reading, or in Recv for one that stopped
// sending, cannot see its context end. The handler runs in its own
// goroutine; once the call's context ends (cap, idle timeout via
// callInfo.abort, drain) the handler gets grace to return by itself, after
// which the interceptor returns the status, gRPC closes the stream, the
// blocked Send or Recv fails and the handler returns (releasing its run
// slot) in the background.
func loggingStream(l *slog.Logger, maxCall, grace time.Duration) grpc.StreamServerInterceptor {
	return func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
		start := time.Now()
		ci := &callInfo{}
		outer := ss.Context()
		ctx, cancel := context.WithTimeoutCause(context.WithValue(outer, callInfoKey{}, ci), maxCall, callTooLong(maxCall))
		defer cancel()
		ctx, abort := context.WithCancelCause(ctx)
		defer abort(nil)
		ci.abort = abort
		done := make(chan error, 1)
		go func() {
			defer func() {
				if p := recover(); p != nil {
					l.ErrorContext(ctx, "panic in stream handler", slog.Any("panic", p), slog.String("stack", string(debug.Stack())))
					done <- status.Errorf(codes.Internal, "internal error (panic: %v); the server logged the stack", p)
				}
			}()
			done <- h(srv, &serverStream{ServerStream: ss, ctx: ctx})
		}()
		var err error
		select {
		case err = <-done:
		case <-ctx.Done():
			t := time.NewTimer(grace)
			select {
			case err = <-done:
			case <-t.C:
				ci.detached.Store(true)
				err = status.FromContextError(ctx.Err()).Err()
			}
			t.Stop()
		}
		if err != nil && ctx.Err() != nil && outer.Err() == nil {
			err = causeStatus(ctx, err)
		}
		logCall(l, ctx, info.FullMethod, start, ci, err, outer.Err() != nil)
		return err
	}
}

// callMetricsOnly wraps the Prometheus stream interceptor (grpcprom) so
// that Lockstep streams are counted per call (started, handled, handling
// time) but not per message: grpcprom's per-message counting (a labelled
// counter lookup and two clock readings each way) cost about 3 % of
// Lockstep's slot rate (BenchmarkLockstep64VsEcho). Lockstep's slots are
// counted by fadeloop_lockstep_slots_total instead; other streams keep
// grpc_server_msg_received_total and grpc_server_msg_sent_total.
func callMetricsOnly(prom grpc.StreamServerInterceptor) grpc.StreamServerInterceptor {
	return func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
		if info.FullMethod != pb.LoopService_Lockstep_FullMethodName {
			return prom(srv, ss, info, h)
		}
		return prom(srv, ss, info, func(srv any, _ grpc.ServerStream) error { return h(srv, ss) })
	}
}

// endStream ends the streaming call of ctx from the server side with the
// status error st (see loggingStream). It is a no-op outside a stream.
func endStream(ctx context.Context, st error) {
	if ci, ok := ctx.Value(callInfoKey{}).(*callInfo); ok && ci.abort != nil {
		ci.abort(st)
	}
}

// decodeErrors holds the decode error of each message that lenientCodec
// could not unmarshal, until the interceptor of its call takes it.
var decodeErrors sync.Map // message pointer -> error

// lenientCodec is the proto codec, except that undecodable bytes are not an
// error at decoding time (gRPC would report those as INTERNAL): the error
// is recorded against the message and the call's interceptor (decodeUnary,
// serverStream.RecvMsg) returns INVALID_ARGUMENT instead, so garbage input
// is the client's fault in status and log.
type lenientCodec struct{ encoding.CodecV2 }

func newLenientCodec() lenientCodec {
	return lenientCodec{encoding.GetCodecV2(protocodec.Name)}
}

func (c lenientCodec) Unmarshal(data mem.BufferSlice, v any) error {
	if in, ok := v.(*slotInbox); ok {
		// Lockstep slot messages: decoded into reused buffers.
		buf := data.MaterializeToBuffer(mem.DefaultBufferPool())
		err := in.decode(buf.ReadOnlyData())
		buf.Free()
		if err != nil {
			decodeErrors.Store(v, err)
		}
		return nil
	}
	if err := c.CodecV2.Unmarshal(data, v); err != nil {
		decodeErrors.Store(v, err)
	}
	return nil
}

// takeDecodeError returns INVALID_ARGUMENT if m could not be decoded.
func takeDecodeError(m any) error {
	if e, ok := decodeErrors.LoadAndDelete(m); ok {
		return status.Errorf(codes.InvalidArgument, "request message is not a valid protobuf encoding of its type: %v", e)
	}
	return nil
}

// decodeUnary returns INVALID_ARGUMENT for a unary request that could not
// be decoded, before the handler sees it.
func decodeUnary(ctx context.Context, req any, _ *grpc.UnaryServerInfo, h grpc.UnaryHandler) (any, error) {
	if err := takeDecodeError(req); err != nil {
		return nil, err
	}
	return h(ctx, req)
}

// healthMethodPrefix is exempt from token authentication.
const healthMethodPrefix = "/grpc.health.v1.Health/"

// tokenAuth checks the "authorization: Bearer TOKEN" metadata of every call
// but health checks against token, comparing SHA-256 digests in constant
// time. The token is never logged or echoed.
type tokenAuth struct{ digest [sha256.Size]byte }

func newTokenAuth(token string) *tokenAuth {
	return &tokenAuth{digest: sha256.Sum256([]byte(token))}
}

func (a *tokenAuth) check(ctx context.Context, method string) error {
	if strings.HasPrefix(method, healthMethodPrefix) {
		return nil
	}
	md, _ := metadata.FromIncomingContext(ctx)
	vals := md.Get("authorization")
	if len(vals) != 1 {
		return status.Error(codes.Unauthenticated, "missing credentials: send metadata \"authorization: Bearer TOKEN\"")
	}
	const prefix = "bearer "
	v := vals[0]
	if len(v) < len(prefix) || !strings.EqualFold(v[:len(prefix)], prefix) {
		return status.Error(codes.Unauthenticated, "authorization metadata must be \"Bearer TOKEN\"")
	}
	got := sha256.Sum256([]byte(strings.TrimSpace(v[len(prefix):])))
	if subtle.ConstantTimeCompare(got[:], a.digest[:]) != 1 {
		return status.Error(codes.Unauthenticated, "invalid bearer token")
	}
	return nil
}

func (a *tokenAuth) unary(ctx context.Context, req any, info *grpc.UnaryServerInfo, h grpc.UnaryHandler) (any, error) {
	if err := a.check(ctx, info.FullMethod); err != nil {
		return nil, err
	}
	return h(ctx, req)
}

func (a *tokenAuth) stream(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
	if err := a.check(ss.Context(), info.FullMethod); err != nil {
		return err
	}
	return h(srv, ss)
}

// watchLimit bounds the health Watch streams open at once on a server:
// each holds two goroutines and buffers for as long as the client likes.
type watchLimit struct {
	n     atomic.Int64
	limit int64
	retry time.Duration
}

func (w *watchLimit) stream(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
	if info.FullMethod != healthMethodPrefix+"Watch" {
		return h(srv, ss)
	}
	if w.n.Add(1) > w.limit {
		w.n.Add(-1)
		return overloaded(fmt.Sprintf("server busy: %d health Watch streams open (max_health_watchers); poll Check or retry later", w.limit), w.retry)
	}
	defer w.n.Add(-1)
	return h(srv, ss)
}

// recoveryHandler turns a handler panic into INTERNAL and logs the stack.
func recoveryHandler(l *slog.Logger) recovery.Option {
	return recovery.WithRecoveryHandlerContext(func(ctx context.Context, p any) error {
		l.ErrorContext(ctx, "panic in handler", slog.Any("panic", p), slog.String("stack", string(debug.Stack())))
		return status.Errorf(codes.Internal, "internal error (panic: %v); the server logged the stack", p)
	})
}

// goSafe runs f in a goroutine; a panic in f is recovered, logged with its
// stack and returned as INTERNAL through the result channel.
func goSafe(l *slog.Logger, ctx context.Context, f func() error) <-chan error {
	done := make(chan error, 1)
	go func() {
		defer func() {
			if p := recover(); p != nil {
				l.ErrorContext(ctx, "panic in worker", slog.Any("panic", p), slog.String("stack", string(debug.Stack())))
				done <- status.Errorf(codes.Internal, "internal error (panic: %v); the server logged the stack", p)
			}
		}()
		done <- f()
	}()
	return done
}
