package service

import (
	"context"
	"log/slog"
	"runtime/debug"
	"sync/atomic"
	"time"

	"github.com/grpc-ecosystem/go-grpc-middleware/v2/interceptors/recovery"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/peer"
	"google.golang.org/grpc/status"
)

// callInfo collects what a handler learns about its call for the log line.
type callInfo struct {
	cost      atomic.Int64 // tap-slots of the request, once known
	userSlots atomic.Int64 // user-slots simulated
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

// logCall writes one structured line per call: method, code, duration,
// cost and simulated user-slots, and the peer.
func logCall(l *slog.Logger, ctx context.Context, method string, start time.Time, ci *callInfo, err error) {
	st := status.Convert(err)
	level := slog.LevelInfo
	switch st.Code() {
	case codes.OK, codes.Canceled, codes.InvalidArgument, codes.ResourceExhausted,
		codes.DeadlineExceeded, codes.NotFound:
	default:
		level = slog.LevelError
	}
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
	l.LogAttrs(ctx, level, "rpc", attrs...)
}

// loggingUnary and loggingStream install the call info and log each call.
// They also cap the call's deadline at maxCall.
func loggingUnary(l *slog.Logger, maxCall time.Duration) grpc.UnaryServerInterceptor {
	return func(ctx context.Context, req any, info *grpc.UnaryServerInfo, h grpc.UnaryHandler) (any, error) {
		start := time.Now()
		ci := &callInfo{}
		ctx, cancel := context.WithTimeout(context.WithValue(ctx, callInfoKey{}, ci), maxCall)
		defer cancel()
		resp, err := h(ctx, req)
		logCall(l, ctx, info.FullMethod, start, ci, err)
		return resp, err
	}
}

func loggingStream(l *slog.Logger, maxCall time.Duration) grpc.StreamServerInterceptor {
	return func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
		start := time.Now()
		ci := &callInfo{}
		ctx, cancel := context.WithTimeout(context.WithValue(ss.Context(), callInfoKey{}, ci), maxCall)
		defer cancel()
		err := h(srv, &serverStream{ServerStream: ss, ctx: ctx})
		logCall(l, ctx, info.FullMethod, start, ci, err)
		return err
	}
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
