// Cancellation of the engine's long stages.
//
// Every stage whose work grows with the model or the grid takes a context
// and polls it in its loops, so that it stops soon after the caller's
// deadline or cancellation and returns ctx.Err() (context.Canceled or
// context.DeadlineExceeded), releasing what it allocated. ctx.Err() is an
// atomic load, so the loops poll it at a granularity of about a
// millisecond of work or finer (every pollEvery iterations of a cheap loop,
// every iteration of an expensive one); the cost is not measurable
// (BenchmarkCompile). Nothing half-computed is kept: the lazy per-model
// values (lazy.go) and the shared caches store only finished results.

package physics

import (
	"context"

	"github.com/materials-lab/modegrid/physics/eigen"
)

// pollEvery is the number of iterations of a cheap loop (a few hundred
// nanoseconds each at most) between two polls of the context.
const pollEvery = 256

// stopFunc returns a poll of ctx for the loops that take a stop function
// (the assembly of D(q), the eigensolver's done channel takes ctx.Done()).
func stopFunc(ctx context.Context) func() bool {
	return func() bool { return ctx.Err() != nil }
}

// dynamicalMatrixCtx is DynamicalMatrix (full Hermitian matrix, freshly
// allocated) with the assembly polling ctx: at 512 sites one matrix is
// 37 MB and tens of milliseconds.
func (m *Model) dynamicalMatrixCtx(ctx context.Context, q [3]float64) ([]complex128, error) {
	mustQ("DynamicalMatrix", q)
	nm := m.ModeCount()
	out := make([]complex128, nm*nm)
	var t phaseTable
	if !m.assemble(q, out, &t, stopFunc(ctx)) {
		return nil, ctx.Err()
	}
	fillUpper(out, nm)
	return out, ctx.Err()
}

// symEigen is the engine's Hermitian eigensolver (package eigen) applied to a
// real symmetric matrix: with a real input its reflectors and rotations
// are real, so the eigenvectors come out real (imaginary parts exactly 0).
// Unlike a library call it polls the context inside its O(n³) loops, which
// matters for the long-wave set-up of large cells (n = 1 542 at 512
// sites); it is also faster than gonum's EigenSym there (2.5 s against
// 4.8 s at n = 768 in one run on this machine).
type symEigen struct {
	w    *eigen.Work
	vals []float64 // eigenvalues, ascending, after solve
}

func newSymEigen(n int) *symEigen { return &symEigen{w: eigen.NewWork(n)} }

// set stores element (i, j), j ≤ i, of the lower triangle.
func (s *symEigen) set(i, j int, v float64) { s.w.A()[i*s.w.N()+j] = complex(v, 0) }

// solve computes the eigenvalues and eigenvectors. It returns false when
// the solver did not converge (a non-finite matrix) and ctx.Err() when ctx
// ended first.
func (s *symEigen) solve(ctx context.Context) (bool, error) {
	s.w.SetStop(ctx.Done())
	switch s.w.Solve(true) {
	case eigen.Stopped:
		return false, ctx.Err()
	case eigen.NoConverge:
		return false, nil
	}
	s.vals = s.w.Values()
	return true, ctx.Err()
}

// vector returns component i of the eigenvector of eigenvalue k.
func (s *symEigen) vector(k, i int) float64 { return real(s.w.Vectors()[k*s.w.N()+i]) }
