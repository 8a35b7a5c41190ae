// Package lattice is the geometry of a Bravais lattice given as plain
// vectors: three-vector helpers (Norm, Dot, Cross, Add, Sub, Scale), the
// reciprocal lattice (Reciprocal), the cell measure (GramMeasure), the
// recognised lattice type with its built-in Brillouin-zone points (Detect,
// StandardFrac), the default paths through them (DefaultPath), and the
// lattice's point group (PointGroup, InvTransposeInt).
//
// Units and conventions:
//   - Lattice vectors are the rows of a [3][3]float64 in Å; only the first
//     d rows (d = 1, 2, 3, the dimensionality) are read, the rest are zero.
//   - Reciprocal vectors are rows in Å⁻¹ with the 2π included:
//     b_k·a_l = 2π δ_kl, spanning the same subspace as the d vectors.
//   - Points are fractional coordinates of the reciprocal vectors of the
//     caller's own lattice (the type's standard cell is found inside it;
//     type.go cites the tables). "G" is Γ and is always present.
//   - Rotations are integer matrices acting on fractional (lattice)
//     coordinates; their q-space counterparts are R⁻ᵀ (InvTransposeInt).
//
// Invariants: lattice types are recognised to TypeTol (relative) in any
// primitive basis and orientation; PointGroup lists the metric-preserving
// automorphisms with entries in {−1, 0, 1} in a fixed order. The package
// imports only the standard library and nothing of the engine.
package lattice
