// Package gate admits a bounded number of computations at once, with a
// bounded wait queue and a wait timeout, so that overload is refused early
// and plainly instead of piling up.
package gate

import (
	"context"
	"fmt"
	"sync/atomic"
	"time"
)

// Refusal is why Acquire turned a computation away. Cap names the limit
// (the flag that sets it), so the refusal can say what to raise.
type Refusal struct {
	Reason string        // "queue_full" or "wait_timeout"
	Cap    string        // "max-queue" or "queue-timeout"
	Limit  int           // the queue length, for queue_full
	Wait   time.Duration // the timeout, for wait_timeout
}

func (r *Refusal) Error() string {
	if r.Reason == ReasonQueueFull {
		return fmt.Sprintf("server busy: %d computations already waiting (cap %s=%d)", r.Limit, r.Cap, r.Limit)
	}
	return fmt.Sprintf("server busy: no computation slot within %v (cap %s=%v)", r.Wait, r.Cap, r.Wait)
}

// Refusal reasons.
const (
	ReasonQueueFull   = "queue_full"
	ReasonWaitTimeout = "wait_timeout"
)

// Gate admits at most Slots computations at once; up to MaxQueue more may
// wait, each at most Timeout. Safe for concurrent use; make one with New.
type Gate struct {
	slots    chan struct{} // one token per running computation
	maxQueue int
	timeout  time.Duration
	queued   atomic.Int64
}

// New returns a gate of slots concurrent computations (≥ 1), a queue of
// maxQueue waiters (0: none wait, refuse at once) and a wait timeout (≤ 0:
// wait until the caller's context ends).
func New(slots, maxQueue int, timeout time.Duration) *Gate {
	if slots < 1 {
		slots = 1
	}
	return &Gate{slots: make(chan struct{}, slots), maxQueue: maxQueue, timeout: timeout}
}

// Acquire waits for a slot. It returns a release function to call exactly
// once when the computation ends, or a *Refusal, or ctx.Err() when the
// caller's context ends first.
func (g *Gate) Acquire(ctx context.Context) (func(), error) {
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	select {
	case g.slots <- struct{}{}:
		return g.release, nil
	default:
	}
	if n := g.queued.Add(1); n > int64(g.maxQueue) {
		g.queued.Add(-1)
		return nil, &Refusal{Reason: ReasonQueueFull, Cap: "max-queue", Limit: g.maxQueue}
	}
	defer g.queued.Add(-1)
	var expired <-chan time.Time
	if g.timeout > 0 {
		t := time.NewTimer(g.timeout)
		defer t.Stop()
		expired = t.C
	}
	select {
	case g.slots <- struct{}{}:
		return g.release, nil
	case <-expired:
		return nil, &Refusal{Reason: ReasonWaitTimeout, Cap: "queue-timeout", Wait: g.timeout}
	case <-ctx.Done():
		return nil, ctx.Err()
	}
}

func (g *Gate) release() { <-g.slots }

// InFlight is the number of computations holding a slot.
func (g *Gate) InFlight() int { return len(g.slots) }

// Queued is the number of computations waiting for a slot.
func (g *Gate) Queued() int { return int(g.queued.Load()) }

// Slots is the number of computations admitted at once.
func (g *Gate) Slots() int { return cap(g.slots) }
