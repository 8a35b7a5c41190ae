// Package eigen is the engine's Hermitian eigensolver: Householder
// reduction to a real tridiagonal matrix followed by implicit QL with
// Wilkinson's shift (eigen.go explains the choice and its measurements),
// with the real symmetric 2n×2n embedding solved by gonum as the fallback
// and test reference (embed.go).
//
// Conventions:
//   - Matrices are n×n, row-major, []complex128 of length n*n; only the
//     lower triangle (column ≤ row) is read. Units are the caller's: the
//     solver is scale-free (it rescales by powers of two internally).
//   - Eigenvalues come back ascending; eigenvectors are orthonormal and
//     mode-major: vectors[k*n+c] is component c of eigenvector k.
//
// Use:
//   - Hermitian(h, n, vectors) allocates and returns fresh slices.
//   - Hot loops keep one Work per matrix size and goroutine: fill A(),
//     call Solve, read Values() and Vectors() (reused by the next Solve).
//     Nothing is allocated after NewWork.
//   - SetStop(done) makes solves of CancelCheckModes modes and more poll
//     done every PollRows+1 rows of their O(n²) steps and return Stopped.
//
// Invariants: every eigenvalue is exact for a matrix within a few ε‖H‖ of
// the input (both stages are backward stable); a non-finite input gives
// NoConverge from Solve (Hermitian then falls back to the embedding, whose
// results are NaN). The package depends on gonum only.
package eigen
