// Package parallel is the engine's one parallel-loop helper: every loop of
// package physics that spreads work over the cores goes through it, so
// that a panic in a worker, cancellation and deterministic summation are
// handled in one place.
//
// # Overview
//
// Group is the primitive: goroutines started with Group.Go share one
// context, cancelled when any of them panics or when the owner calls
// Stop; Group.Wait waits for all of them. The loops are built on it:
//
//   - For hands out the indices [0, n) in blocks to at most GOMAXPROCS
//     workers, each with its own body (and workspace), built in the worker.
//   - Chunks runs fn over [0, n) cut into chunks of a fixed size.
//   - Slices cuts [0, n) into a fixed number of contiguous slices, each
//     processed in order by one worker; it is the loop for sums that must
//     not depend on scheduling.
//
// # Panics
//
// A panic in a worker does not end the process. The worker recovers it,
// records the first one as a *PanicError (the original value and the
// worker's stack at the panic; later panics of the same run are dropped),
// and cancels the group's context, so the other workers stop at their next
// poll. When every worker has exited, Wait — and so For, Chunks and Slices
// — panics again on the caller's goroutine with that *PanicError. A
// recover in the caller (the gRPC server's recovery interceptor, or a
// deferred recover of a test) thus sees it, with the worker's stack in
// PanicError.Stack and the original value in PanicError.Value. A worker
// that panics with a *PanicError (a nested loop re-raising) is recorded as
// is, keeping the innermost stack. No goroutine of a loop outlives the
// call.
//
// # Cancellation
//
// Every loop runs its workers in a Group derived from the caller's
// context, whose Done channel (closed when the caller's context ends or a
// worker panics) is polled between indices (For) or chunks (Chunks,
// Slices), and is handed to For's body builders, whose long computations
// (a large eigensolver) poll it themselves; cancellation thus stops a loop
// within one index or chunk. A loop returns ctx.Err() of the caller's
// context once every worker has exited: nil means every index was run; on
// a non-nil error the indices not reached were skipped and the caller
// must discard the partial result.
//
// # Ordering and determinism
//
// For and Chunks run every index (chunk) exactly once, in no particular
// order and on any worker. Slices fixes the work of each slice — the
// bounds lo = s·n/slices, hi = (s+1)·n/slices and the chunks inside, in
// increasing order — from n, chunk and slices alone; only which goroutine
// runs a slice varies. A caller that keeps one accumulator per slice and
// merges them in slice order therefore gets the same floating-point sums,
// bit for bit, under any scheduling and any GOMAXPROCS, provided slices
// does not depend on the core count (SliceCount does not).
//
// # Fault injection
//
// SetFaultHook installs a function called at the start of every worker of
// every Group (so of every loop), with the group's context. It exists so
// that tests outside the engine can make a real engine worker panic; when
// no hook is set it costs one atomic load per worker started.
package parallel
