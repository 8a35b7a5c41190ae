// Cancellable lazy values: the per-model results computed on first use
// (symmetry operations, the long-wave limit).

package physics

import (
	"context"
	"sync"
)

// lazy holds a value computed on first use by a cancellable function. Only
// a successful computation is kept: one that fails (cancelled, or its
// caller's deadline passed) stores nothing, and the next caller computes
// afresh, so a cancelled first use never leaves a partial or failed result
// for later callers. Concurrent first users wait for the one computing,
// each only as long as its own context allows; if that computation fails,
// one of them starts again under its own context. The zero value is
// ready; a lazy must not be copied after first use.
type lazy[T any] struct {
	mu   sync.Mutex    // guards everything below
	ok   bool          // val is set
	val  T             // the value, once ok
	busy chan struct{} // closed when the running computation ends; nil when none runs
}

// get returns the value, computing it with compute(ctx) if no earlier call
// succeeded. It returns ctx.Err() when ctx ends while it waits for another
// caller's computation, and compute's error when its own fails.
func (l *lazy[T]) get(ctx context.Context, compute func(context.Context) (T, error)) (T, error) {
	for {
		l.mu.Lock()
		if l.ok {
			v := l.val
			l.mu.Unlock()
			return v, nil
		}
		if l.busy == nil {
			l.busy = make(chan struct{})
			l.mu.Unlock()
			return l.run(ctx, compute)
		}
		busy := l.busy
		l.mu.Unlock()
		select {
		case <-busy: // done: take its value, or compute if it failed
		case <-ctx.Done():
			var zero T
			return zero, ctx.Err()
		}
	}
}

// peek returns the value and true if an earlier call computed it, without
// computing anything.
func (l *lazy[T]) peek() (T, bool) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.val, l.ok
}

// run computes the value as the one caller allowed to, storing it on
// success and always (even on a panic) waking the waiters.
func (l *lazy[T]) run(ctx context.Context, compute func(context.Context) (T, error)) (v T, err error) {
	stored := false
	defer func() {
		l.mu.Lock()
		if stored {
			l.val, l.ok = v, true
		}
		close(l.busy)
		l.busy = nil
		l.mu.Unlock()
	}()
	v, err = compute(ctx)
	stored = err == nil
	return v, err
}
