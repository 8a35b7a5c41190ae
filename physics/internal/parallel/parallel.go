package parallel

import (
	"context"
	"fmt"
	"runtime"
	"runtime/debug"
	"sync"
	"sync/atomic"
)

// PanicError is a panic recovered in a worker, re-raised on the caller's
// goroutine by Group.Wait and the loops.
type PanicError struct {
	Value any    // the value the worker panicked with
	Stack []byte // the worker's stack at the panic (runtime/debug.Stack)
}

// Error gives the original value and the worker's stack, so that a panic
// nobody recovers still shows where it happened.
func (e *PanicError) Error() string {
	return fmt.Sprintf("parallel: worker panicked: %v\n\nworker stack:\n%s", e.Value, e.Stack)
}

// Unwrap returns the original value when it is an error, for errors.Is/As.
func (e *PanicError) Unwrap() error {
	err, _ := e.Value.(error)
	return err
}

// Group runs workers that share a context; see the package documentation.
// A Group is used once: Go any number of times, then Wait.
type Group struct {
	ctx    context.Context
	cancel context.CancelFunc
	wg     sync.WaitGroup

	mu  sync.Mutex  // protects err
	err *PanicError // first panic recovered, nil if none
}

// NewGroup returns a Group and its context, derived from ctx and
// cancelled when a worker panics, on Stop, or by Wait.
func NewGroup(ctx context.Context) (*Group, context.Context) {
	gctx, cancel := context.WithCancel(ctx)
	return &Group{ctx: gctx, cancel: cancel}, gctx
}

// Go runs fn on a new goroutine. A panic in fn is recovered, recorded and
// cancels the group's context.
func (g *Group) Go(fn func()) {
	g.wg.Add(1)
	go func() {
		defer g.wg.Done()
		defer g.recover()
		if h := faultHook.Load(); h != nil {
			(*h)(g.ctx)
		}
		fn()
	}()
}

// recover records a worker's panic and stops the other workers.
func (g *Group) recover() {
	r := recover()
	if r == nil {
		return
	}
	pe, ok := r.(*PanicError)
	if !ok {
		pe = &PanicError{Value: r, Stack: debug.Stack()}
	}
	g.mu.Lock()
	if g.err == nil {
		g.err = pe
	}
	g.mu.Unlock()
	g.cancel()
}

// Stop cancels the group's context; workers stop at their next poll.
func (g *Group) Stop() { g.cancel() }

// Wait waits for every worker to exit and releases the group's context.
// If a worker panicked, Wait then panics with its *PanicError.
func (g *Group) Wait() {
	g.wg.Wait()
	g.cancel()
	g.mu.Lock()
	err := g.err
	g.mu.Unlock()
	if err != nil {
		panic(err)
	}
}

// For runs a body over the indices [0, n), handed out in blocks of block
// indices to min(GOMAXPROCS, ⌈n/block⌉) workers. Each worker builds its
// own body with newBody(stop), where stop is closed when the loop is
// cancelled (ctx ended, or another worker panicked); the body returns
// false when it saw stop closed, which ends its worker. stop is polled
// before every index. For returns ctx.Err() once every worker has exited,
// and panics with a *PanicError if one of them panicked.
func For(ctx context.Context, n, block int, newBody func(stop <-chan struct{}) func(i int) bool) error {
	if n <= 0 {
		return ctx.Err()
	}
	block = max(1, block)
	workers := min(runtime.GOMAXPROCS(0), (n+block-1)/block)
	g, gctx := NewGroup(ctx)
	stop := gctx.Done()
	var next atomic.Int64
	for w := 0; w < workers; w++ {
		g.Go(func() {
			body := newBody(stop)
			for {
				lo := int(next.Add(int64(block)) - int64(block))
				if lo >= n {
					return
				}
				for i := lo; i < min(lo+block, n); i++ {
					select {
					case <-stop:
						return
					default:
					}
					if !body(i) {
						return
					}
				}
			}
		})
	}
	g.Wait()
	return ctx.Err()
}

// Chunks runs fn over [0, n) in chunks [lo, hi) of chunk indices (the
// last one shorter), on all cores, in no particular order. ctx is polled
// between chunks. It returns ctx.Err() once every worker has exited, and
// panics with a *PanicError if one of them panicked.
func Chunks(ctx context.Context, n, chunk int, fn func(lo, hi int)) error {
	chunk = max(1, chunk)
	return For(ctx, (n+chunk-1)/chunk, 1, func(<-chan struct{}) func(int) bool {
		return func(c int) bool {
			lo := c * chunk
			fn(lo, min(lo+chunk, n))
			return true
		}
	})
}

// MaxSlices is the most slices SliceCount gives.
const MaxSlices = 16

// SliceCount is a number of slices for Slices over n items in chunks of
// chunk: ⌈n/chunk⌉, at least 1 and at most MaxSlices. It does not depend
// on the core count, so sums merged in slice order are the same on any
// machine.
func SliceCount(n, chunk int) int {
	return max(1, min(MaxSlices, (n+chunk-1)/max(1, chunk)))
}

// Slices runs work over [0, n) cut into slices contiguous slices
// [s·n/slices, (s+1)·n/slices), each processed by one worker in increasing
// order in chunks of at most chunk indices; work receives the slice number
// s. The slices are spread over min(GOMAXPROCS, slices) workers. ctx is
// polled between chunks. It returns ctx.Err() once every worker has
// exited, and panics with a *PanicError if one of them panicked. See the
// package documentation for why the result of a per-slice accumulation is
// deterministic.
func Slices(ctx context.Context, n, chunk, slices int, work func(slice, lo, hi int)) error {
	slices, chunk = max(1, slices), max(1, chunk)
	return For(ctx, slices, 1, func(stop <-chan struct{}) func(int) bool {
		return func(s int) bool {
			lo, hi := s*n/slices, (s+1)*n/slices
			for c := lo; c < hi; c += chunk {
				select {
				case <-stop:
					return false
				default:
				}
				work(s, c, min(c+chunk, hi))
			}
			return true
		}
	})
}

// faultHook is the installed fault hook, nil if none.
var faultHook atomic.Pointer[func(context.Context)]

// SetFaultHook installs h (nil removes it) as the function every worker of
// every Group calls first, with the group's context, and returns a
// function restoring the previous hook. It is for tests that need a real
// worker to fail (a panicking h); see the package documentation.
func SetFaultHook(h func(ctx context.Context)) (restore func()) {
	var p *func(context.Context)
	if h != nil {
		p = &h
	}
	old := faultHook.Swap(p)
	return func() { faultHook.Store(old) }
}
