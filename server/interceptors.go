package server

import (
	"context"
	"fmt"
	"log/slog"
	"runtime/debug"
	"strings"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/peer"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/physics"
)

// callInfo collects what a handler learns about its call for the log line:
// filled by the handler's goroutine, read by the interceptor after the
// handler returns.
type callInfo struct {
	model string // model hash
	cache string // where the result came from (memory, backend, shared, computed)
}

type callInfoKey struct{}

// noteModel records the model hash of the call for its log line.
func noteModel(ctx context.Context, hash string) {
	if ci, ok := ctx.Value(callInfoKey{}).(*callInfo); ok {
		ci.model = hash
	}
}

// noteCache records where the call's result came from.
func noteCache(ctx context.Context, src string) {
	if ci, ok := ctx.Value(callInfoKey{}).(*callInfo); ok {
		ci.cache = src
	}
}

// prefix shortens a model hash for logs.
func prefix(hash string) string {
	if len(hash) > 12 {
		return hash[:12]
	}
	return hash
}

// unaryInterceptor authenticates (authenticate), recovers panics (→ INTERNAL, logged,
// counted) and logs one line per call. It runs inside the metrics
// interceptor, so the metrics see the final status code.
func (s *Server) unaryInterceptor(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (resp any, err error) {
	start := time.Now()
	ci := &callInfo{}
	ctx = context.WithValue(ctx, callInfoKey{}, ci)
	decodeErr := s.undecodable.take(req) // taken whatever happens next
	defer func() {
		if p := recover(); p != nil {
			resp, err = nil, s.svc.panicked(info.FullMethod, p, debug.Stack())
		}
		s.logCall(ctx, info.FullMethod, start, ci, err)
	}()
	if err := s.authenticate(ctx, info.FullMethod); err != nil {
		return nil, err
	}
	if decodeErr != nil {
		return nil, s.reportUndecodable(info.FullMethod, req, decodeErr)
	}
	return handler(ctx, req)
}

// streamInterceptor is unaryInterceptor for streaming calls.
func (s *Server) streamInterceptor(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) (err error) {
	start := time.Now()
	ci := &callInfo{}
	ctx := context.WithValue(ss.Context(), callInfoKey{}, ci)
	defer func() {
		if p := recover(); p != nil {
			err = s.svc.panicked(info.FullMethod, p, debug.Stack())
		}
		s.logCall(ctx, info.FullMethod, start, ci, err)
	}()
	if err := s.authenticate(ctx, info.FullMethod); err != nil {
		return err
	}
	return handler(srv, &decodeCheckedStream{contextStream: &contextStream{ServerStream: ss, ctx: ctx}, s: s, method: info.FullMethod})
}

// healthLogInterceptor logs the calls of the health-only port (at debug
// level, as every health check) and recovers panics.
func (s *Server) healthLogInterceptor(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (resp any, err error) {
	start := time.Now()
	defer func() {
		if p := recover(); p != nil {
			resp, err = nil, s.svc.panicked(info.FullMethod, p, debug.Stack())
		}
		s.logCall(ctx, info.FullMethod, start, &callInfo{}, err)
	}()
	if err := s.undecodable.take(req); err != nil {
		return nil, s.reportUndecodable(info.FullMethod, req, err)
	}
	return handler(ctx, req)
}

// healthStreamLogInterceptor is healthLogInterceptor for Health.Watch.
func (s *Server) healthStreamLogInterceptor(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) (err error) {
	start := time.Now()
	defer func() {
		if p := recover(); p != nil {
			err = s.svc.panicked(info.FullMethod, p, debug.Stack())
		}
		s.logCall(ss.Context(), info.FullMethod, start, &callInfo{}, err)
	}()
	return handler(srv, &decodeCheckedStream{contextStream: &contextStream{ServerStream: ss, ctx: ss.Context()}, s: s, method: info.FullMethod})
}

// healthMethodPrefix starts the full method names of the standard health
// service, whose calls (probes every few seconds) are logged at debug.
const healthMethodPrefix = "/grpc.health.v1.Health/"

// authenticate checks the call's client certificate (mutual TLS: every
// method) and bearer token (every method but health), counting failures.
func (s *Server) authenticate(ctx context.Context, method string) error {
	err := s.certs.verify(ctx)
	if err == nil {
		err = s.tokens.authorize(ctx, method)
	}
	if err != nil {
		s.svc.met.authFailures.Inc()
	}
	return err
}

// contextStream carries the call-info context into a streaming handler.
type contextStream struct {
	grpc.ServerStream
	ctx context.Context
}

func (c *contextStream) Context() context.Context { return c.ctx }

// panicked logs and counts a recovered panic and returns the INTERNAL
// status sent to the client (which reveals nothing of the panic). The log
// is one structured record: method, panic value and stack (a JSON handler
// writes it on one line). A panic of an engine worker, re-raised on the
// calling goroutine as a *physics.PanicError, is logged with the worker's
// original value and stack (where it happened), and the stack where it was
// recovered as caller_stack.
func (s *Service) panicked(method string, p any, stack []byte) error {
	s.met.panics.Inc()
	attrs := []any{"method", method}
	if pe, ok := p.(*physics.PanicError); ok {
		attrs = append(attrs, "panic", fmt.Sprint(pe.Value), "where", "engine worker",
			"stack", string(pe.Stack), "caller_stack", string(stack))
	} else {
		attrs = append(attrs, "panic", fmt.Sprint(p), "stack", string(stack))
	}
	s.log.Error("panic recovered", attrs...)
	return status.Error(codes.Internal, "internal error (logged on the server)")
}

// logCall writes the call's JSON log line: method, code, duration, model
// hash prefix and cache source. Server-side failures log at error level;
// health checks (probes, every few seconds per prober) at debug, whatever
// their outcome, so that they do not drown the calls.
func (s *Server) logCall(ctx context.Context, method string, start time.Time, ci *callInfo, err error) {
	code := status.Code(err)
	level := slog.LevelInfo
	switch code {
	case codes.Internal, codes.Unknown, codes.DataLoss:
		level = slog.LevelError
	case codes.ResourceExhausted, codes.Unauthenticated:
		level = slog.LevelWarn
	}
	if strings.HasPrefix(method, healthMethodPrefix) {
		level = slog.LevelDebug
	}
	if !s.cfg.Logger.Enabled(ctx, level) {
		return
	}
	attrs := []slog.Attr{
		slog.String("method", method),
		slog.String("code", code.String()),
		slog.Float64("duration_ms", float64(time.Since(start).Microseconds())/1000),
	}
	if ci.model != "" {
		attrs = append(attrs, slog.String("model", prefix(ci.model)))
	}
	if ci.cache != "" {
		attrs = append(attrs, slog.String("cache", ci.cache))
	}
	if p, ok := peer.FromContext(ctx); ok && p.Addr != nil {
		attrs = append(attrs, slog.String("peer", p.Addr.String()))
	}
	if err != nil {
		attrs = append(attrs, slog.String("error", status.Convert(err).Message()))
	}
	s.cfg.Logger.LogAttrs(ctx, level, "call", attrs...)
}
