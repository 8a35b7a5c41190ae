package gate

import (
	"context"
	"errors"
	"runtime"
	"testing"
	"time"

	"go.uber.org/goleak"
)

func TestMain(m *testing.M) { goleak.VerifyTestMain(m) }

func testContext(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	t.Cleanup(cancel)
	return ctx
}

// waitQueued spins until n callers wait on g.
func waitQueued(t *testing.T, g *Gate, n int) {
	t.Helper()
	ctx := testContext(t)
	for g.Queued() != n {
		if ctx.Err() != nil {
			t.Fatalf("%d queued; want %d", g.Queued(), n)
		}
		runtime.Gosched()
	}
}

func TestRefusals(t *testing.T) {
	tests := []struct {
		name     string
		slots    int
		queue    int
		timeout  time.Duration
		wantCode string // reason of the refusal of one more caller
	}{
		{name: "no queue refuses at once", slots: 1, queue: 0, timeout: time.Hour, wantCode: ReasonQueueFull},
		{name: "wait times out", slots: 2, queue: 1, timeout: time.Millisecond, wantCode: ReasonWaitTimeout},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			g := New(tt.slots, tt.queue, tt.timeout)
			ctx := testContext(t)
			var releases []func()
			for range tt.slots {
				r, err := g.Acquire(ctx)
				if err != nil {
					t.Fatalf("acquire within the slots: %v", err)
				}
				releases = append(releases, r)
			}
			if g.InFlight() != tt.slots {
				t.Errorf("in flight %d; want %d", g.InFlight(), tt.slots)
			}
			_, err := g.Acquire(ctx)
			var r *Refusal
			if !errors.As(err, &r) || r.Reason != tt.wantCode {
				t.Fatalf("got %v; want refusal %s", err, tt.wantCode)
			}
			if r.Cap == "" || r.Error() == "" {
				t.Errorf("refusal %+v does not name its cap", r)
			}
			for _, rel := range releases {
				rel()
			}
			if g.InFlight() != 0 || g.Queued() != 0 {
				t.Errorf("after release: %d in flight, %d queued; want 0, 0", g.InFlight(), g.Queued())
			}
		})
	}
}

func TestQueueFullWhileWaiting(t *testing.T) {
	g := New(1, 1, time.Hour)
	ctx := testContext(t)
	release, err := g.Acquire(ctx)
	if err != nil {
		t.Fatal(err)
	}
	got := make(chan error, 1)
	go func() {
		rel, err := g.Acquire(ctx)
		if err == nil {
			rel()
		}
		got <- err
	}()
	waitQueued(t, g, 1)
	var r *Refusal
	if _, err := g.Acquire(ctx); !errors.As(err, &r) || r.Reason != ReasonQueueFull || r.Limit != 1 {
		t.Errorf("third caller got %v; want queue_full with limit 1", err)
	}
	release()
	if err := <-got; err != nil {
		t.Errorf("queued caller got %v; want the freed slot", err)
	}
}

func TestCallerContextEndsWait(t *testing.T) {
	g := New(1, 4, time.Hour)
	release, err := g.Acquire(testContext(t))
	if err != nil {
		t.Fatal(err)
	}
	defer release()
	ctx, cancel := context.WithCancel(testContext(t))
	got := make(chan error, 1)
	go func() {
		_, err := g.Acquire(ctx)
		got <- err
	}()
	waitQueued(t, g, 1)
	cancel()
	if err := <-got; !errors.Is(err, context.Canceled) {
		t.Errorf("got %v; want context.Canceled", err)
	}
	if g.Queued() != 0 {
		t.Errorf("%d still queued; want 0", g.Queued())
	}
	done, cancel2 := context.WithCancel(testContext(t))
	cancel2()
	if _, err := g.Acquire(done); !errors.Is(err, context.Canceled) {
		t.Errorf("ended context got %v; want context.Canceled before any wait", err)
	}
}
