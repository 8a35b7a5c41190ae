// Package eigen is the engine's Hermitian eigensolver: Householder
// reduction to a real tridiagonal matrix followed by implicit QL with
// Wilkinson's shift (eigen.go explains the choice and its measurements),
// with the real symmetric 2n×2n embedding solved by gonum as the fallback
// and test reference (embed.go).
//
// Two builds:
//   - The default build is pure Go: the solver above at every size.
//   - With the build tag lapack (and cgo, linking the system's OpenBLAS:
//     Debian/Ubuntu libopenblas-dev to build, libopenblas0 to run), matrices
//     from a crossover size up (dispatch.go: 64 modes for eigenvalues only,
//     40 with eigenvectors, measured) go to LAPACK instead: the stages of
//     its Hermitian drivers (zhetrd, then dsterf or zstedc, then zunmtr)
//     called one by one (lapack_cgo.go). This is the build the container
//     image and `make build` ship; DEVELOPERS.md ("Measured: eigensolver
//     size ladder") has the figures. Backend reports which build this is;
//     WorkScale, how cost estimates count its solves.
//
// Conventions:
//   - Matrices are n×n, row-major, []complex128 of length n*n; only the
//     lower triangle (column ≤ row) is read. Units are the caller's: the
//     solver is scale-free (it rescales by powers of two internally).
//   - Eigenvalues come back ascending; eigenvectors are orthonormal and
//     mode-major: vectors[k*n+c] is component c of eigenvector k. Both
//     builds follow this; within a degenerate eigenvalue the basis chosen
//     differs between the paths.
//
// Use:
//   - Hermitian(h, n, vectors) allocates and returns fresh slices.
//   - Hot loops keep one Work per matrix size and goroutine: fill A(),
//     call Solve, read Values() and Vectors() (reused by the next Solve).
//     The first Solve of each mode (eigenvalues only, with eigenvectors)
//     allocates that mode's workspace; nothing is allocated after.
//     WorkspaceBytes says how much, for cost estimates.
//   - SetStop(done) makes solves of CancelCheckModes modes and more poll
//     done every PollRows+1 rows of their O(n²) steps and return Stopped.
//     The LAPACK path polls between LAPACK calls instead: before each
//     32-column panel of the reduction, before the tridiagonal stage and
//     before each 256-column block of the back-transformation; one call
//     cannot be interrupted (DEVELOPERS.md states the longest).
//
// Threads (lapack build): the engine spreads q-points over its own
// workers, so a LAPACK call normally runs on one OpenBLAS thread and calls
// from several workers run side by side. A call of wideMin modes or more
// that finds no other LAPACK call in flight runs on up to GOMAXPROCS
// OpenBLAS threads (capped by OPENBLAS_NUM_THREADS when set), holding
// every other call back meanwhile so that the cores are never
// oversubscribed (threadPolicy in lapack_cgo.go).
//
// Invariants: every eigenvalue is exact for a matrix within a few ε‖H‖ of
// the input (every stage of both paths is backward stable); a non-finite
// input gives NaN eigenvalues (and vectors) with status OK, without
// reaching LAPACK; NoConverge means QL (or LAPACK) reported a failure on
// finite input, never seen, and Hermitian then falls back to the
// embedding. The package depends on gonum, and in the lapack build on
// OpenBLAS through cgo.
package eigen
