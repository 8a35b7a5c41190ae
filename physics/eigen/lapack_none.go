//go:build !(lapack && cgo)

// Without the lapack build tag (or without cgo) the solver is pure Go; this
// file stands in for lapack_cgo.go.

package eigen

// lapackLinked: this build has no LAPACK path.
const lapackLinked = false

// lapackWork has no LAPACK workspace to hold in this build.
type lapackWork struct{}

// lapackSolve is never called in this build (useLAPACK is false).
func (w *Work) lapackSolve(bool) Status { panic("eigen: LAPACK not linked in this build") }

// backendName names the linked solver.
func backendName() string { return "go" }

// backendDetail has nothing to add for the pure-Go solver.
func backendDetail() string { return "" }

// lapackWorkBytes is never asked in this build.
func lapackWorkBytes(int, bool) int64 { return 0 }

// lapackBlockCols matches lapack_cgo.go's (tests size matrices by it).
const lapackBlockCols = 256
