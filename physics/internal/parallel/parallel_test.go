package parallel

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"runtime"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"go.uber.org/goleak"
)

func TestMain(m *testing.M) { goleak.VerifyTestMain(m) }

// withProcs runs the test with GOMAXPROCS = n, so that loops have several
// workers even on a one-core machine.
func withProcs(t *testing.T, n int) {
	t.Helper()
	old := runtime.GOMAXPROCS(n)
	t.Cleanup(func() { runtime.GOMAXPROCS(old) })
}

// recovered calls f and returns what it panicked with (nil if nothing).
func recovered(f func()) (p any) {
	defer func() { p = recover() }()
	f()
	return nil
}

// errBoom is the value the panicking worker of the tests throws.
var errBoom = errors.New("boom in worker")

// panicAtIndex panics with errBoom; a named function, so its frame can be
// looked for in the recorded stack.
func panicAtIndex() { panic(errBoom) }

// waitStop blocks until stop is closed; it fails the test if that does not
// happen within a generous bound (the loop did not stop its workers).
func waitStop(t *testing.T, stop <-chan struct{}) {
	select {
	case <-stop:
	case <-time.After(20 * time.Second):
		t.Error("a worker was not stopped after another one panicked")
	}
}

// TestForPanicReachesCaller: one worker panics; every other worker is
// blocked in its body until the loop's stop channel closes, so the loop
// only returns if the panic stopped them, and then reports success, so
// only the loop's own poll keeps them from taking further indices. The
// caller's recover then gets a *PanicError carrying the original value
// and the panicking worker's stack, and no goroutine is left behind.
func TestForPanicReachesCaller(t *testing.T) {
	withProcs(t, 4)
	const n, bad = 1_000_000, 3
	var ran atomic.Int64
	p := recovered(func() {
		_ = For(context.Background(), n, 1, func(stop <-chan struct{}) func(int) bool {
			return func(i int) bool {
				ran.Add(1)
				if i == bad {
					panicAtIndex()
				}
				waitStop(t, stop)
				return true
			}
		})
	})
	pe, ok := p.(*PanicError)
	if !ok {
		t.Fatalf("recovered %T %v; want *PanicError", p, p)
	}
	if pe.Value != errBoom || !errors.Is(pe, errBoom) {
		t.Errorf("Value = %v; want the original errBoom", pe.Value)
	}
	if !strings.Contains(string(pe.Stack), "panicAtIndex") {
		t.Errorf("stack does not show the worker's panic site:\n%s", pe.Stack)
	}
	if got := ran.Load(); got > 4 {
		t.Errorf("%d indices ran; want at most one per worker (4): the others must stop", got)
	}
	goleak.VerifyNone(t)
}

// TestGroupPanicAfterOthersExit: Wait re-raises only after every worker
// has returned (the slow worker's exit is recorded before the recover in
// the caller runs).
func TestGroupPanicAfterOthersExit(t *testing.T) {
	g, ctx := NewGroup(context.Background())
	var slowDone atomic.Bool
	g.Go(func() {
		waitStop(t, ctx.Done())
		slowDone.Store(true)
	})
	g.Go(func() { panic("worker failed") })
	p := recovered(g.Wait)
	pe, ok := p.(*PanicError)
	if !ok || pe.Value != "worker failed" {
		t.Fatalf("recovered %v; want *PanicError with value %q", p, "worker failed")
	}
	if !slowDone.Load() {
		t.Error("Wait re-panicked before the other worker exited")
	}
	if ctx.Err() == nil {
		t.Error("the group's context is not cancelled after a panic")
	}
}

// TestNestedPanicKeepsInnerStack: a panic in a loop run inside a worker of
// another loop reaches the outer caller with the original value and the
// inner worker's stack (not a PanicError wrapping a PanicError).
func TestNestedPanicKeepsInnerStack(t *testing.T) {
	withProcs(t, 2)
	p := recovered(func() {
		_ = Chunks(context.Background(), 4, 1, func(lo, _ int) {
			_ = Slices(context.Background(), 8, 1, 2, func(s, lo2, _ int) {
				if lo == 2 && lo2 == 5 {
					panicAtIndex()
				}
			})
		})
	})
	pe, ok := p.(*PanicError)
	if !ok {
		t.Fatalf("recovered %T; want *PanicError", p)
	}
	if pe.Value != errBoom {
		t.Errorf("Value = %v (%T); want errBoom", pe.Value, pe.Value)
	}
	if !strings.Contains(string(pe.Stack), "panicAtIndex") {
		t.Errorf("stack lacks the inner panic site:\n%s", pe.Stack)
	}
}

// TestCoverage: For, Chunks and Slices visit every index of [0, n) exactly
// once, for sizes around the block and chunk boundaries.
func TestCoverage(t *testing.T) {
	withProcs(t, 3)
	for _, n := range []int{0, 1, 15, 16, 17, 63, 64, 65, 1000} {
		loops := map[string]func(seen []atomic.Int32) error{
			"For": func(seen []atomic.Int32) error {
				return For(context.Background(), n, 16, func(<-chan struct{}) func(int) bool {
					return func(i int) bool { seen[i].Add(1); return true }
				})
			},
			"Chunks": func(seen []atomic.Int32) error {
				return Chunks(context.Background(), n, 64, func(lo, hi int) {
					for i := lo; i < hi; i++ {
						seen[i].Add(1)
					}
				})
			},
			"Slices": func(seen []atomic.Int32) error {
				return Slices(context.Background(), n, 7, SliceCount(n, 7), func(_, lo, hi int) {
					for i := lo; i < hi; i++ {
						seen[i].Add(1)
					}
				})
			},
		}
		for name, run := range loops {
			seen := make([]atomic.Int32, n)
			if err := run(seen); err != nil {
				t.Fatalf("%s n=%d: %v", name, n, err)
			}
			for i := range seen {
				if c := seen[i].Load(); c != 1 {
					t.Fatalf("%s n=%d: index %d visited %d times; want 1", name, n, i, c)
				}
			}
		}
	}
}

// TestSlicesOrderAndDeterminism: each slice's chunks come in increasing
// order, and per-slice sums merged in slice order are bit-for-bit the same
// with 1 and with 4 workers, on values whose floating-point sum depends on
// the order of addition.
func TestSlicesOrderAndDeterminism(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	const n, chunk = 10_000, 37
	x := make([]float64, n)
	for i := range x {
		x[i] = math.Ldexp(r.Float64(), r.IntN(60)-30)
	}
	sum := func(procs int) float64 {
		old := runtime.GOMAXPROCS(procs)
		defer runtime.GOMAXPROCS(old)
		slices := SliceCount(n, chunk)
		acc := make([]float64, slices)
		last := make([]int, slices)
		for s := range last {
			last[s] = -1
		}
		var mu sync.Mutex
		err := Slices(context.Background(), n, chunk, slices, func(s, lo, hi int) {
			mu.Lock()
			if lo <= last[s] {
				t.Errorf("slice %d: chunk at %d after one at %d", s, lo, last[s])
			}
			last[s] = lo
			mu.Unlock()
			for i := lo; i < hi; i++ {
				acc[s] += x[i]
			}
		})
		if err != nil {
			t.Fatal(err)
		}
		total := 0.0
		for _, a := range acc {
			total += a
		}
		return total
	}
	if a, b := sum(1), sum(4); math.Float64bits(a) != math.Float64bits(b) {
		t.Errorf("sum with 1 worker %v, with 4 workers %v; want identical bits", a, b)
	}
}

// TestForCancelStopsWithinOneIndex: cancelling ctx from inside index k
// ends the loop with context.Canceled, and each worker starts at most one
// more index after the cancellation (the one it may have been past the
// poll for).
func TestForCancelStopsWithinOneIndex(t *testing.T) {
	withProcs(t, 4)
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var cancelled atomic.Bool
	var after atomic.Int64
	err := For(ctx, 1_000_000, 16, func(<-chan struct{}) func(int) bool {
		return func(i int) bool {
			if cancelled.Load() {
				after.Add(1)
			}
			if i == 100 {
				cancel()
				cancelled.Store(true)
			}
			return true
		}
	})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("err = %v; want context.Canceled", err)
	}
	if a := after.Load(); a > 4 {
		t.Errorf("%d indices started after the cancel; want at most one per worker (4)", a)
	}
}

// TestSlicesCancelBetweenChunks: a cancel inside a chunk ends Slices with
// context.Canceled; after it, each worker starts at most the one chunk it
// may have been past the poll for.
func TestSlicesCancelBetweenChunks(t *testing.T) {
	withProcs(t, 2)
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var cancelled atomic.Bool
	var after atomic.Int64
	err := Slices(ctx, 1000, 10, 2, func(_, lo, _ int) {
		if cancelled.Load() {
			after.Add(1)
		}
		if lo == 0 {
			cancel()
			cancelled.Store(true)
		}
	})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("err = %v; want context.Canceled", err)
	}
	if a := after.Load(); a > 2 {
		t.Errorf("%d chunks started after the cancel; want at most one per worker (2)", a)
	}
}

type hookKey struct{}

// TestFaultHook: an installed hook runs in every worker with the caller's
// context values; a panicking hook reaches the caller like any worker
// panic; restoring removes it.
func TestFaultHook(t *testing.T) {
	withProcs(t, 2)
	restore := SetFaultHook(func(ctx context.Context) {
		if ctx.Value(hookKey{}) == "fail" {
			panic("injected")
		}
	})
	ctx := context.WithValue(context.Background(), hookKey{}, "fail")
	p := recovered(func() {
		_ = For(ctx, 100, 1, func(<-chan struct{}) func(int) bool {
			return func(int) bool { return true }
		})
	})
	if pe, ok := p.(*PanicError); !ok || pe.Value != "injected" {
		t.Fatalf("recovered %v; want *PanicError with value %q", p, "injected")
	}
	if err := Chunks(context.Background(), 100, 10, func(int, int) {}); err != nil {
		t.Fatalf("unmarked context: %v", err)
	}
	restore()
	if p := recovered(func() { _ = Chunks(ctx, 100, 10, func(int, int) {}) }); p != nil {
		t.Fatalf("after restore: panicked with %v", p)
	}
}
