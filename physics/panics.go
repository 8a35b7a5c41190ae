// Panics in the engine's parallel workers, and the hook that lets tests
// cause one.

package physics

import (
	"context"

	"github.com/materials-lab/modegrid/physics/internal/parallel"
)

// PanicError is what the engine panics with when one of its parallel
// workers panicked: the worker's original panic value and its stack. Every
// parallel computation (grids, reduced grids, DOS, thermal sums,
// StreamModes) recovers a worker's panic in the worker, stops the other
// workers, and — once all of them have exited — panics again with a
// *PanicError on the goroutine that called the engine, where a recover
// (the server's recovery interceptor) can catch it. Without this, a panic
// on a worker goroutine would end the process whatever the caller does.
type PanicError = parallel.PanicError

// SetFaultHook installs h as a function called at the start of every
// parallel worker of the engine, with the context of the computation (so
// it carries the caller's context values, gRPC metadata included), and
// returns a function that restores the previous hook; nil removes it.
//
// It is a fault-injection point for tests only: a hook that panics makes a
// real engine worker fail in the middle of a real computation, which is how
// the server's tests check that such a panic becomes an INTERNAL status and
// that the server goes on serving. It is an exported function rather than
// a test-only build tag because the tests that need it live in other
// packages (server/) and run under the plain `go test ./...` of every
// developer and of CI; with no hook set it costs one atomic load per
// worker started (a few per computation). Production code never sets it.
func SetFaultHook(h func(ctx context.Context)) (restore func()) {
	return parallel.SetFaultHook(h)
}
