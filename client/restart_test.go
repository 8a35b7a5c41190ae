package client_test

// Restart tests: a real modegrid server is stopped under load and a new one
// started on the same port. The client counts its own connection attempts
// (a dialer) and call attempts (a gRPC stats handler); nothing answers in
// the server's place.

import (
	"context"
	"net"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/stats"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// attemptCounter is a gRPC stats handler counting the attempts of modegrid
// calls the client makes: one Begin per attempt, retries included.
type attemptCounter struct{ n atomic.Int64 }

type methodKey struct{}

func (a *attemptCounter) TagRPC(ctx context.Context, info *stats.RPCTagInfo) context.Context {
	return context.WithValue(ctx, methodKey{}, info.FullMethodName)
}

func (a *attemptCounter) HandleRPC(ctx context.Context, s stats.RPCStats) {
	if m, _ := ctx.Value(methodKey{}).(string); isModegrid(m) {
		if _, ok := s.(*stats.Begin); ok {
			a.n.Add(1)
		}
	}
}

func (a *attemptCounter) TagConn(ctx context.Context, _ *stats.ConnTagInfo) context.Context {
	return ctx
}

func (a *attemptCounter) HandleConn(context.Context, stats.ConnStats) {}

// dialCounter counts the client's TCP connection attempts; each failed one
// is also signalled on failed (dropped when nobody listens and the buffer
// is full).
type dialCounter struct {
	dials  atomic.Int64
	failed chan struct{}
}

func newDialCounter() *dialCounter { return &dialCounter{failed: make(chan struct{}, 64)} }

func (d *dialCounter) dial(ctx context.Context, addr string) (net.Conn, error) {
	d.dials.Add(1)
	var nd net.Dialer
	conn, err := nd.DialContext(ctx, "tcp", addr)
	if err != nil {
		select {
		case d.failed <- struct{}{}:
		default:
		}
	}
	return conn, err
}

// counted dials addr with the client's defaults plus opts, counting dials and
// call attempts.
func counted(t *testing.T, addr string, opts ...client.Option) (*client.Client, *dialCounter, *attemptCounter) {
	t.Helper()
	dc, ac := newDialCounter(), &attemptCounter{}
	opts = append(opts, client.WithDialOptions(grpc.WithContextDialer(dc.dial), grpc.WithStatsHandler(ac)))
	return dial(t, addr, opts...), dc, ac
}

// maxReconnects is the most connection attempts the default back-off allows
// in a span of time: one at once, then one after each wait, every wait at
// least (1 − jitter) of its nominal value. An attempt in progress at either
// end adds one.
func maxReconnects(span time.Duration) int64 {
	n := int64(2)
	wait := float64(client.DefaultConnectBaseDelay)
	sum := 0.0
	for {
		w := min(wait, float64(client.DefaultConnectMaxDelay)) * (1 - client.DefaultConnectJitter)
		if sum+w > float64(span) {
			return n
		}
		sum += w
		n++
		wait *= client.DefaultConnectMultiplier
	}
}

// caller is one goroutine calling the server in a loop.
type caller struct {
	calls, failed atomic.Int64
	mu            sync.Mutex // protects firstErr and waiters
	firstErr      error
	waiters       []chan struct{} // closed at the caller's next success
}

// waitSuccess returns a channel closed when the caller next succeeds.
func (c *caller) waitSuccess() <-chan struct{} {
	ch := make(chan struct{})
	c.mu.Lock()
	c.waiters = append(c.waiters, ch)
	c.mu.Unlock()
	return ch
}

func (c *caller) record(err error) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if err != nil {
		c.failed.Add(1)
		if c.firstErr == nil {
			c.firstErr = err
		}
		return
	}
	for _, ch := range c.waiters {
		close(ch)
	}
	c.waiters = nil
}

// work returns the call caller i makes: checks, modes streams and DOS, all
// on one model, which the client sends by hash once it is known.
func work(t *testing.T, c *client.Client, i int) func(context.Context) error {
	model := client.Inline(example(t, "rocksalt-like"))
	switch i % 3 {
	case 0:
		return func(ctx context.Context) error {
			_, err := c.Check(ctx, &modegridv1.CheckModelRequest{Model: model})
			return err
		}
	case 1:
		return func(ctx context.Context) error {
			_, err := c.Modes(ctx, &modegridv1.ComputeModesRequest{Model: model, Qpoints: client.Grid(2, 2, 2)})
			return err
		}
	default:
		return func(ctx context.Context) error {
			_, err := c.DOS(ctx, &modegridv1.ComputeDosRequest{Model: model, Qpoints: client.Grid(4, 4, 4)})
			return err
		}
	}
}

// waitAll waits until every channel is closed, or fails the test.
func waitAll(t *testing.T, ctx context.Context, what string, chs []<-chan struct{}) {
	t.Helper()
	for i, ch := range chs {
		select {
		case <-ch:
		case <-ctx.Done():
			t.Fatalf("caller %d: no %s before the test's deadline", i, what)
		}
	}
}

// TestRestartUnderLoad: callers with 5 s deadlines keep calling while the
// only server stops and a new one starts on the same port after a brief
// outage. No call fails: each waits for the server instead. During the
// outage the callers make at most one attempt per call in flight (plus the
// retry of a call the stop broke), and the client reconnects on its back-off
// schedule, not in a spin.
func TestRestartUnderLoad(t *testing.T) {
	const (
		callers        = 6
		callerDeadline = 5 * time.Second
		outage         = time.Second // the injected fault: no server for at least this long
	)
	ctx := testContext(t)
	addr, kill := startServer(t, "")
	c, dc, ac := counted(t, addr)
	cs := make([]*caller, callers)
	stop := make(chan struct{})
	var wg sync.WaitGroup
	var warm []<-chan struct{}
	for i := range cs {
		cs[i] = &caller{}
		warm = append(warm, cs[i].waitSuccess())
		call := work(t, c, i)
		wg.Add(1)
		go func(cl *caller) {
			defer wg.Done()
			for {
				select {
				case <-stop:
					return
				default:
				}
				cctx, cancel := context.WithTimeout(ctx, callerDeadline)
				cl.calls.Add(1)
				cl.record(call(cctx))
				cancel()
			}
		}(cs[i])
	}
	defer func() { close(stop); wg.Wait() }()
	waitAll(t, ctx, "success before the outage", warm)

	// The outage: stop the server (listener closed, connections cut), and
	// start a new one once the fault has lasted its time and the client
	// has failed to reconnect at least twice.
	dials0, attempts0, calls0 := dc.dials.Load(), ac.n.Load(), totalCalls(cs)
	began := time.Now()
	kill()
	fault := time.After(outage)
	for range 2 {
		select {
		case <-dc.failed:
		case <-ctx.Done():
			t.Fatal("the client never tried to reconnect")
		}
	}
	<-fault
	span := time.Since(began)
	dials, attempts, calls := dc.dials.Load()-dials0, ac.n.Load()-attempts0, totalCalls(cs)-calls0
	var rec recorder
	startServer(t, addr, rec.options()...)

	var back []<-chan struct{}
	for _, cl := range cs {
		back = append(back, cl.waitSuccess())
	}
	waitAll(t, ctx, "success after the restart", back)

	for i, cl := range cs {
		if n := cl.failed.Load(); n > 0 {
			t.Errorf("caller %d: %d of %d calls failed; first: %v", i, n, cl.calls.Load(), cl.firstErr)
		}
	}
	t.Logf("outage %v: %d connection attempts, %d call attempts, %d calls begun; %d calls in all",
		span.Round(time.Millisecond), dials, attempts, calls, totalCalls(cs))
	if limit := maxReconnects(span); dials > limit {
		t.Errorf("%d connection attempts during a %v outage; the back-off allows at most %d", dials, span.Round(time.Millisecond), limit)
	}
	// Each caller's call in flight may be broken by the stop and retried
	// once (or retried transparently once more); a new call waits.
	if limit := int64(3 * callers); attempts > limit {
		t.Errorf("%d call attempts during the outage; want at most %d (%d callers each waiting)", attempts, limit, callers)
	}
	checkResent(t, rec.snapshot())
}

// checkResent: the restarted server, which knows no model, got calls by
// hash (answered NOT_FOUND) and the model inline after them.
func checkResent(t *testing.T, calls []call) {
	t.Helper()
	firstRef, inlineAfter := -1, false
	for i, c := range calls {
		if c.ref != "" && firstRef < 0 {
			firstRef = i
		}
		if c.inline && firstRef >= 0 && i > firstRef {
			inlineAfter = true
		}
	}
	if firstRef < 0 || !inlineAfter {
		t.Errorf("restarted server saw a call by hash at %d and an inline resend after it: %v; want both", firstRef, inlineAfter)
	}
}

func totalCalls(cs []*caller) int64 {
	var n int64
	for _, c := range cs {
		n += c.calls.Load()
	}
	return n
}

// TestOutageLongerThanWait: while the server is down, a call waits for it
// until its deadline (DEADLINE_EXCEEDED) or the client's ready wait
// (UNAVAILABLE), whichever ends first, a call without a deadline included;
// it makes one attempt, not a spin, and IsUnreachable recognises the error.
func TestOutageLongerThanWait(t *testing.T) {
	tests := []struct {
		name     string
		deadline time.Duration // 0: none
		opts     []client.Option
		stream   bool
		wantCode codes.Code
		wantMsg  string
	}{
		{name: "unary, deadline first", deadline: 300 * time.Millisecond, wantCode: codes.DeadlineExceeded, wantMsg: "connection refused"},
		{name: "stream, deadline first", deadline: 300 * time.Millisecond, stream: true, wantCode: codes.DeadlineExceeded},
		{name: "ready wait first", deadline: 10 * time.Second, opts: []client.Option{client.WithReadyWait(300 * time.Millisecond)},
			wantCode: codes.Unavailable, wantMsg: "connection refused"},
		{name: "no deadline", opts: []client.Option{client.WithReadyWait(300 * time.Millisecond)}, stream: true,
			wantCode: codes.Unavailable, wantMsg: "no ready modegrid server within 300ms"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			addr, kill := startServer(t, "")
			c, dc, ac := counted(t, addr, tc.opts...)
			chain := client.Inline(example(t, "chain"))
			if _, err := c.Check(testContext(t), &modegridv1.CheckModelRequest{Model: chain}); err != nil {
				t.Fatal(err)
			}
			kill()
			<-dc.failed // the client has seen the server go and failed to reconnect
			dials0, attempts0 := dc.dials.Load(), ac.n.Load()
			ctx := context.Background()
			if tc.deadline > 0 {
				var cancel context.CancelFunc
				ctx, cancel = context.WithTimeout(ctx, tc.deadline)
				defer cancel()
			}
			began := time.Now()
			var err error
			if tc.stream {
				_, err = c.Modes(ctx, &modegridv1.ComputeModesRequest{Model: chain, Qpoints: client.QList([3]float64{0.5, 0, 0})})
			} else {
				_, err = c.Check(ctx, &modegridv1.CheckModelRequest{Model: chain})
			}
			span := time.Since(began)
			if got := status.Code(err); got != tc.wantCode {
				t.Fatalf("code %v (%v); want %v", got, err, tc.wantCode)
			}
			if !strings.Contains(err.Error(), tc.wantMsg) {
				t.Errorf("error %q does not say %q", err, tc.wantMsg)
			}
			if !client.IsUnreachable(err) {
				t.Errorf("IsUnreachable(%v) = false; want true", err)
			}
			if n := ac.n.Load() - attempts0; n != 1 {
				t.Errorf("%d call attempts; want 1 (waiting, not retrying)", n)
			}
			if n, limit := dc.dials.Load()-dials0, maxReconnects(span); n > limit {
				t.Errorf("%d connection attempts in %v; the back-off allows at most %d", n, span.Round(time.Millisecond), limit)
			}
		})
	}
}

// TestFailFast: WithFailFast restores failing at once while no server is
// ready (UNAVAILABLE, the deadline far away), for tools that count refusals.
func TestFailFast(t *testing.T) {
	addr := closedPort(t)
	c, _, ac := counted(t, addr, client.WithFailFast(), client.WithMaxAttempts(1))
	_, err := c.Check(testContext(t), &modegridv1.CheckModelRequest{Model: client.Inline(example(t, "chain"))})
	if status.Code(err) != codes.Unavailable || !client.IsUnreachable(err) {
		t.Errorf("got %v; want UNAVAILABLE", err)
	}
	if n := ac.n.Load(); n != 1 {
		t.Errorf("%d call attempts; want 1", n)
	}
}
