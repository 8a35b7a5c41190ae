package server

import (
	"context"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

func modesReq(t *testing.T) *modegridv1.ComputeModesRequest {
	return &modegridv1.ComputeModesRequest{Model: inline(example(t, "chain")), Qpoints: qlist(0.1, 0.2)}
}

// TestOverloadRefused: with every slot busy, a computation past the queue
// (or past its wait) gets RESOURCE_EXHAUSTED naming the cap, with retry
// advice, and is counted by reason.
func TestOverloadRefused(t *testing.T) {
	tests := []struct {
		name   string
		cfg    Config
		reason string
		cap    string
	}{
		{name: "queue full", cfg: Config{MaxConcurrent: 1, MaxQueue: -1}, reason: "queue_full", cap: "max-queue=0"},
		{name: "wait timeout", cfg: Config{MaxConcurrent: 1, MaxQueue: 4, QueueTimeout: time.Millisecond}, reason: "wait_timeout", cap: "queue-timeout=1ms"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b := newBlocker(kindModes)
			ts := startServer(t, tt.cfg, serverOpts{hook: b.hook})
			ctx := testContext(t)
			// Compile the model first so that only the modes computations
			// compete for the slot.
			if _, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: inline(example(t, "chain"))}); status.Code(err) != codes.InvalidArgument {
				t.Fatalf("warm-up: %v", err)
			}
			first := make(chan error, 1)
			go func() {
				_, err := collectModes(ctx, ts.api, modesReq(t))
				first <- err
			}()
			<-b.entered
			_, err := collectModes(ctx, ts.api, modesReq(t))
			st := status.Convert(err)
			if st.Code() != codes.ResourceExhausted {
				t.Fatalf("got %v; want ResourceExhausted", err)
			}
			if !strings.Contains(st.Message(), tt.cap) {
				t.Errorf("message %q does not name the cap %s", st.Message(), tt.cap)
			}
			var quota, retry bool
			for _, d := range st.Details() {
				switch d.(type) {
				case *errdetails.QuotaFailure:
					quota = true
				case *errdetails.RetryInfo:
					retry = true
				}
			}
			if !quota || !retry {
				t.Errorf("details %v; want QuotaFailure and RetryInfo", st.Details())
			}
			if n := metric(t, ts.srv.Registry(), "modegrid_computations_rejected_total", map[string]string{"reason": tt.reason}); n != 1 {
				t.Errorf("rejected{reason=%s} = %v; want 1", tt.reason, n)
			}
			close(b.release)
			if err := <-first; err != nil {
				t.Errorf("the admitted call failed: %v", err)
			}
		})
	}
}

// TestCancellationStopsComputing: a client deadline or cancellation stops
// the computation (the computation sees its context end), the client gets
// DEADLINE_EXCEEDED or CANCELED, and the cancellation counter shows it.
func TestCancellationStopsComputing(t *testing.T) {
	tests := []struct {
		name     string
		deadline bool
		want     codes.Code
	}{
		{name: "deadline", deadline: true, want: codes.DeadlineExceeded},
		{name: "cancel", want: codes.Canceled},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b := newBlocker(kindModes) // never released: only the context ends it
			ts := startServer(t, Config{}, serverOpts{hook: b.hook})
			var ctx context.Context
			var cancel context.CancelFunc
			if tt.deadline {
				ctx, cancel = context.WithTimeout(testContext(t), 300*time.Millisecond)
			} else {
				ctx, cancel = context.WithCancel(testContext(t))
				go func() { <-b.entered; cancel() }()
			}
			defer cancel()
			_, err := collectModes(ctx, ts.api, modesReq(t))
			if status.Code(err) != tt.want {
				t.Fatalf("got %v; want %v", err, tt.want)
			}
			waitFor(t, "the cancellation counter", func() bool {
				return metric(t, ts.srv.Registry(), "modegrid_computations_canceled_total", map[string]string{"kind": kindModes}) == 1
			})
			waitFor(t, "the slot to be released", func() bool { return ts.srv.svc.gate.InFlight() == 0 })
		})
	}
}

// TestPanicsBecomeInternal: a panic in a handler's goroutine (caught by the
// recovery interceptor) or inside a shared computation (caught by the
// flight) reaches the client as INTERNAL without its text, and is counted.
func TestPanicsBecomeInternal(t *testing.T) {
	for _, kind := range []string{kindModes, kindCompile} {
		t.Run(kind, func(t *testing.T) {
			var armed atomic.Bool
			armed.Store(true)
			ts := startServer(t, Config{}, serverOpts{hook: func(_ context.Context, k string) {
				if k == kind && armed.Load() {
					panic("deliberate test panic")
				}
			}})
			_, err := collectModes(testContext(t), ts.api, modesReq(t))
			st := status.Convert(err)
			if st.Code() != codes.Internal || strings.Contains(st.Message(), "deliberate") {
				t.Fatalf("got %v; want Internal without the panic text", err)
			}
			if n := metric(t, ts.srv.Registry(), "modegrid_panics_recovered_total", nil); n != 1 {
				t.Errorf("panics counter %v; want 1", n)
			}
			if n := metric(t, ts.srv.Registry(), "grpc_server_handled_total", map[string]string{"grpc_method": "ComputeModes", "grpc_code": "Internal"}); n != 1 {
				t.Errorf("handled{ComputeModes, Internal} = %v; want 1", n)
			}
			// The server keeps serving after a panic.
			armed.Store(false)
			if _, err := collectModes(testContext(t), ts.api, modesReq(t)); err != nil {
				t.Errorf("after the panic: %v", err)
			}
		})
	}
}
