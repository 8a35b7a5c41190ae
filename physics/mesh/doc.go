// Package mesh is the engine's q-point meshes: regular grids and the
// wavevector sets of finite crystals (GridSpec, QPoint), their reduction by
// integer q-space rotations and time reversal (Reduce, IrreducibleGrid,
// Compatible, IrreducibleUpperBound), the cache that keeps reductions for
// reuse (ReductionCache), the cutting of a grid into simplices for the
// tetrahedron method (GridSimplices, CornerIndex) and the symmetry classes
// of those simplices (SimplexClasses).
//
// Units and conventions:
//   - q is in fractional coordinates of the reciprocal vectors (rows in
//     Å⁻¹, 2π included, as in package lattice); grid points are wrapped
//     into (−½, ½] and listed in grid order, index (a·N₂ + b)·N₃ + c.
//   - A spec is used after Check (or physics.NormalizeGrid) has set its
//     dimensionality d: mesh components past d are 1, the half-step shift
//     (Shifted) applies along the d lattice directions only.
//   - Rotations act on fractional q (q' = R·q) and must map the grid onto
//     itself (Compatible); the caller puts the identity first. Time
//     reversal (q → −q) is always added.
//
// Invariants: ΣMult equals the number of grid points; OpIndex k ≥ 0 means
// q_g ≡ Rots[k]·q_rep, k < 0 means q_g ≡ −Rots[−k−1]·q_rep. The package
// keeps no process-global state: a ReductionCache is owned, bounded and
// passed in by its caller (nil caches nothing). It imports only the
// standard library.
package mesh
