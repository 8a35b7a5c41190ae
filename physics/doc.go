// Package physics is modegrid's lattice-dynamics engine: harmonic
// force-constant (Born–von Kármán) models of crystals, their dynamical
// matrices, normal modes, densities of states and thermal properties.
//
// It imports only the standard library and gonum; the gRPC service converts
// its own messages to these types at its edge.
//
// # Units
//
// Lengths are in ångström (Å), masses in unified atomic mass units (amu) and
// force constants in eV/Å² (springs given in N/m are converted on compile,
// 1 eV/Å² = 16.02176634 N/m, CODATA 2018 exact). Frequencies are ordinary
// frequencies ν in THz unless a Unit says otherwise; energies are eV,
// temperatures K. Every physical constant lives in units.go.
//
// # Conventions
//
// Wavevectors q are fractional coordinates of the reciprocal lattice
// vectors: q = Σ qₖ bₖ with bₖ·aₗ = 2π δₖₗ, so q = (0.5, 0, 0) is the zone
// boundary along b₁.
//
// The dynamical matrix uses the cell (lattice-vector) phase convention:
//
//	D_{iα,jβ}(q) = Σ_n Φ_{iα,jβ}(0,i; n,j) exp(2πi q·n) / sqrt(m_i m_j)
//
// where n is the integer cell offset. D(q) is then periodic in q with the
// reciprocal lattice; eigenvalues do not depend on the convention, the
// eigenvector phases do (each site component differs by exp(2πi q·x_j)).
//
// Eigenvalues λ = ω² below zero are imaginary modes; they are reported as
// negative frequencies, −sqrt(|λ|) (common practice).
//
// Force constants follow Φ_{iα,jβ} = ∂²E/∂u_{iα}∂u_{jβ}. A spring of
// longitudinal constant k∥ and transverse constant k⊥ along unit vector e
// contributes Φ(i,j) = −(k∥ e eᵀ + k⊥ (1 − e eᵀ)) between its two ends; the
// self terms Φ(i,i) follow from the acoustic sum rule Σ_{j,n} Φ(0i; n j) = 0.
//
// With p polarizations, atoms move only along the first p Cartesian axes: the
// model uses the top-left p×p part of every block.
//
// # Invariants
//
// D(q) is Hermitian by construction; the three (p) acoustic modes at Γ are
// zero to rounding for any model built from springs, and for blocks when the
// sum rule is enforced.
package physics
