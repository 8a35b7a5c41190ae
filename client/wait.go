package client

import (
	"context"
	"errors"
	"fmt"
	"io"
	"sync"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/stats"
	"google.golang.org/grpc/status"
)

// Waiting for a server.
//
// Calls are wait-for-ready: an attempt that finds no ready replica waits
// for one (gRPC reconnects in the background with exponential back-off and
// jitter) instead of failing at once. The wait of each attempt ends at the
// caller's deadline or after the ready wait (WithReadyWait), whichever comes
// first, so a server that stays down is reported even to a caller without a
// deadline. The ready wait is enforced here: an interceptor gives every call
// a watch, and a stats handler arms it when an attempt begins (before the
// balancer picks a connection) and disarms it when the attempt's headers go
// out on a connection.

// errReadyWait is the cancellation cause of a call whose attempt found no
// ready server within the ready wait.
var errReadyWait = errors.New("ready wait expired")

// unreachableError is the error of a call that never reached a server: the
// ready wait (code UNAVAILABLE) or the caller's deadline (code
// DEADLINE_EXCEEDED) ran out while an attempt waited for one. It carries the
// gRPC status, so status.Code and status.FromError see through it.
type unreachableError struct{ st *status.Status }

func (e *unreachableError) Error() string              { return e.st.Err().Error() }
func (e *unreachableError) GRPCStatus() *status.Status { return e.st }

// waitedOut reports whether err is the error of a call that never reached a
// server.
func waitedOut(err error) bool {
	var ue *unreachableError
	return errors.As(err, &ue)
}

// watchKey is the context key of a call's *watch.
type watchKey struct{}

// watch bounds the time one call's attempts wait for a ready server.
type watch struct {
	d      time.Duration
	cancel context.CancelCauseFunc // cancels the call's context

	mu      sync.Mutex  // protects the fields below
	timer   *time.Timer // the ready-wait timer of the current attempt; nil before the first
	gen     uint64      // attempts armed so far; a timer acts only for its own attempt
	waiting bool        // the current attempt has not reached a server yet
}

// arm starts the ready wait of a new attempt.
func (w *watch) arm() {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.timer != nil {
		w.timer.Stop()
	}
	w.gen++
	g := w.gen
	w.waiting = true
	w.timer = time.AfterFunc(w.d, func() { w.expire(g) })
}

// disarm records that the current attempt reached a server. It reports
// whether the attempt was still waiting for one.
func (w *watch) disarm() (waiting bool) {
	w.mu.Lock()
	defer w.mu.Unlock()
	waiting, w.waiting = w.waiting, false
	if w.timer != nil {
		w.timer.Stop()
	}
	return waiting
}

// expire cancels the call if attempt g is still waiting for a server.
func (w *watch) expire(g uint64) {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.waiting && w.gen == g {
		w.cancel(errReadyWait)
	}
}

// finish ends the watch of a call that returned err, releases its context,
// and marks the error of a call that never reached a server.
func (w *watch) finish(ctx context.Context, err error) error {
	waiting := w.disarm()
	expired := errors.Is(context.Cause(ctx), errReadyWait)
	w.cancel(nil)
	if err == nil || errors.Is(err, io.EOF) {
		return err
	}
	st, ok := status.FromError(err)
	switch {
	case !ok:
		return err
	case expired && st.Code() == codes.Canceled:
		return &unreachableError{status.New(codes.Unavailable,
			fmt.Sprintf("no ready modegrid server within %v (the client's ready wait): %s", w.d, st.Message()))}
	case waiting && st.Code() == codes.DeadlineExceeded:
		return &unreachableError{st}
	}
	return err
}

// waiter adds the ready wait to every call of a connection: unary and
// stream client interceptors that give each call a watch, and a stats
// handler that arms and disarms it per attempt.
type waiter struct{ d time.Duration }

// begin gives a call its watch.
func (c waiter) begin(ctx context.Context) (context.Context, *watch) {
	ctx, cancel := context.WithCancelCause(ctx)
	w := &watch{d: c.d, cancel: cancel}
	return context.WithValue(ctx, watchKey{}, w), w
}

func (c waiter) unary(ctx context.Context, method string, req, reply any, cc *grpc.ClientConn, invoker grpc.UnaryInvoker, opts ...grpc.CallOption) error {
	ctx, w := c.begin(ctx)
	return w.finish(ctx, invoker(ctx, method, req, reply, cc, opts...))
}

func (c waiter) stream(ctx context.Context, desc *grpc.StreamDesc, cc *grpc.ClientConn, method string, streamer grpc.Streamer, opts ...grpc.CallOption) (grpc.ClientStream, error) {
	ctx, w := c.begin(ctx)
	s, err := streamer(ctx, desc, cc, method, opts...)
	if err != nil {
		return nil, w.finish(ctx, err)
	}
	return &watchedStream{ClientStream: s, ctx: ctx, w: w}, nil
}

// watchedStream ends the watch of a stream when the stream ends (its first
// receive error, io.EOF included).
type watchedStream struct {
	grpc.ClientStream
	ctx  context.Context
	w    *watch
	done bool  // the stream has ended
	err  error // the (marked) error it ended with
}

func (s *watchedStream) RecvMsg(m any) error {
	err := s.ClientStream.RecvMsg(m)
	if err == nil {
		return nil
	}
	if !s.done {
		s.done, s.err = true, s.w.finish(s.ctx, err)
	}
	return s.err
}

// TagRPC implements stats.Handler.
func (waiter) TagRPC(ctx context.Context, _ *stats.RPCTagInfo) context.Context { return ctx }

// HandleRPC implements stats.Handler: an attempt begins waiting for a
// server before the balancer picks a connection, and stops once its
// headers are sent on one.
func (waiter) HandleRPC(ctx context.Context, s stats.RPCStats) {
	w, ok := ctx.Value(watchKey{}).(*watch)
	if !ok || !s.IsClient() {
		return
	}
	switch s.(type) {
	case *stats.Begin:
		w.arm()
	case *stats.OutHeader:
		w.disarm()
	}
}

// TagConn implements stats.Handler.
func (waiter) TagConn(ctx context.Context, _ *stats.ConnTagInfo) context.Context { return ctx }

// HandleConn implements stats.Handler.
func (waiter) HandleConn(context.Context, stats.ConnStats) {}
