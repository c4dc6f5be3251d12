package api

import (
	"context"
	"log/slog"
	"runtime/debug"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
)

// logUnary logs each unary call at debug level, and failures that are the server's fault at
// error level; a panic is logged with its stack and answered Internal instead of ending the
// daemon.
func logUnary(log *slog.Logger, via string) grpc.UnaryServerInterceptor {
	return func(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (resp any, err error) {
		start := time.Now()
		defer func() {
			if p := recover(); p != nil {
				log.Error("panic in handler", "method", info.FullMethod, "via", via, "panic", p, "stack", string(debug.Stack()))
				resp, err = nil, status.Error(codes.Internal, "internal error (logged by the server)")
			}
			logCall(ctx, log, info.FullMethod, via, start, err)
		}()
		return handler(ctx, req)
	}
}

// logStream is logUnary for streaming calls.
func logStream(log *slog.Logger, via string) grpc.StreamServerInterceptor {
	return func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) (err error) {
		start := time.Now()
		defer func() {
			if p := recover(); p != nil {
				log.Error("panic in handler", "method", info.FullMethod, "via", via, "panic", p, "stack", string(debug.Stack()))
				err = status.Error(codes.Internal, "internal error (logged by the server)")
			}
			logCall(ss.Context(), log, info.FullMethod, via, start, err)
		}()
		return handler(srv, ss)
	}
}

func logCall(ctx context.Context, log *slog.Logger, method, via string, start time.Time, err error) {
	code := status.Code(err)
	level := slog.LevelDebug
	switch code {
	case codes.Internal, codes.Unknown, codes.DataLoss:
		level = slog.LevelError
	}
	if !log.Enabled(ctx, level) {
		return
	}
	attrs := []slog.Attr{slog.String("method", method), slog.String("via", via), slog.String("code", code.String()),
		slog.Duration("took", time.Since(start))}
	if err != nil {
		attrs = append(attrs, slog.String("error", status.Convert(err).Message()))
	}
	log.LogAttrs(ctx, level, "rpc", attrs...)
}

// requestTimeout gives unary calls a deadline of at most d (a client's shorter deadline
// stands).
func requestTimeout(d time.Duration) grpc.UnaryServerInterceptor {
	return func(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
		if dl, ok := ctx.Deadline(); !ok || time.Until(dl) > d {
			var cancel context.CancelFunc
			ctx, cancel = context.WithTimeout(ctx, d)
			defer cancel()
		}
		return handler(ctx, req)
	}
}
