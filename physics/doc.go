// Package physics is modegrid's lattice-dynamics engine: harmonic
// force-constant (Born–von Kármán) models of crystals, their dynamical
// matrices, normal modes, group velocities, dispersion paths, densities of
// states and thermal properties.
//
// It imports only the standard library and gonum; the gRPC service converts
// its own messages to these types at its edge.
//
// # Overview
//
// A Crystal (lattice, sites, springs, neighbour shells, explicit blocks) is
// checked by Validate and compiled by Compile into an immutable Model. The
// Model gives D(q) and ∂D/∂q, the modes at single points (FrequenciesTHz,
// ModesAt, Point), on lists (StreamModes), on grids (GridModes over a
// GridSpec: Monkhorst–Pack grids or the wavevectors of a finite crystal),
// along paths (Dispersion, with the built-in points of LatticeType and
// StandardPoints), sound velocities (SoundVelocities) and a stability check
// (Stability). Model.Hash is the canonical hash of the compiled physics.
//
// # Units
//
// Lengths are in ångström (Å), masses in unified atomic mass units (amu) and
// force constants in eV/Å² (springs given in N/m are converted on compile,
// 1 eV/Å² = 16.02176634 N/m, CODATA 2018 exact). Eigenvalues of D are
// ω² in eV/Å²/amu; frequencies are ordinary frequencies ν = ω/2π in THz
// unless a Unit says otherwise (meV, cm⁻¹, rad/s; 1 sqrt(eV/Å²/amu) =
// 15.6333042 THz). Wavevectors in Cartesian form and path distances are in
// Å⁻¹ with the 2π included; group and sound velocities in km/s; energies
// in eV, temperatures in K. Every physical constant lives in units.go.
//
// # Conventions
//
// Wavevectors q are fractional coordinates of the reciprocal lattice
// vectors: q = Σ qₖ bₖ with bₖ·aₗ = 2π δₖₗ, so q = (0.5, 0, 0) is the zone
// boundary along b₁. Components past the dimensionality d are 0.
//
// The dynamical matrix uses the cell (lattice-vector) phase convention:
//
//	D_{iα,jβ}(q) = Σ_n Φ_{αβ}(0i; nj) exp(2πi q·n) / sqrt(m_i m_j)
//
// where n is the integer cell offset. D(q) is then periodic in q with the
// reciprocal lattice; eigenvalues do not depend on the convention, the
// eigenvector phases do (site j's components differ by exp(2πi q·x_j) from
// the position convention). Eigenvectors are normalised eigenvectors of
// D(q), mode-major, component c = site·p + axis; within a degenerate
// subspace they are any orthonormal basis, except where group velocities
// are asked (see Group velocities).
//
// Eigenvalues λ = ω² below zero are imaginary modes; they are reported as
// negative frequencies, −sqrt(|λ|) (common practice), and a point has
// Imaginary set when any mode is below −ImaginaryTolTHz. A model is
// unstable (Stability) when a mode away from the acoustic zeros at Γ is.
//
// Force constants follow Φ_{iα,jβ} = ∂²E/∂u_{iα}∂u_{jβ}. A spring of
// longitudinal constant k∥ and transverse constant k⊥ along unit vector e
// contributes Φ(i,j) = −(k∥ e eᵀ + k⊥ (1 − e eᵀ)) between its two ends; the
// self terms Φ(i,i) follow from the acoustic sum rule Σ_{j,n} Φ(0i; nj) = 0.
// An explicit block Φ(from, 0; to, n) implies Φ(to, 0; from, −n) = Φᵀ; an
// on-site block enters through its symmetric part (the only part the energy
// sees) and is checked against the sum rule: SumRuleViolation is the largest
// |Σ_{j,n} Φ_{αβ}(0i; nj)| over sites and the used components, and
// Options.EnforceSumRule replaces such blocks by the sum-rule value.
// Springs, shells and blocks on the same pair add up.
//
// With p polarizations, atoms move only along the first p Cartesian axes: the
// model uses the top-left p×p part of every block.
//
// # Neighbour shells
//
// A Shell between labels A and B puts its spring on every A–B pair at the
// n-th smallest A–B distance, distances within ShellTolA being one shell;
// each bond once. The search radius grows until the shell is known
// complete; the cell-offset limit bounds it, and a shell that cannot be
// completed within the limit is a validation error (ShellInfo reports
// bonds and distance per shell).
//
// # Group velocities
//
// v = ∂ω/∂q by the Hellmann–Feynman theorem from the analytic ∂D/∂q
// (DynamicalMatrixGrad), v_α = eᴴ(∂D/∂q_α)e / 2|ω|, the slope of the signed
// frequency also for imaginary modes. Degenerate subspaces are rotated to
// the eigenvectors of u·∂D/∂q (u = ModeOptions.VelocityDir, or a fixed
// generic direction): the branches that leave the degeneracy along u, so
// velocities do not jump between degenerate branches. Modes at zero
// frequency (the acoustic modes at Γ) get 0; their direction-dependent
// slope is SoundVelocities.
//
// # Eigensolver
//
// Complex Householder tridiagonalisation and implicit QL (root-free for
// eigenvalues only), chosen by measurement over a real 2n×2n embedding in
// gonum and a complex Jacobi method; see the header of eigen.go. Every
// eigenvalue is within a few ε‖D‖ of exact. Workspaces are reused per core:
// grid and stream loops allocate nothing per point.
//
// # Concurrency and cancellation
//
// A Model is safe for concurrent use. GridModes and StreamModes spread
// points over all cores (runtime.GOMAXPROCS); StreamModes emits chunks in q
// order and holds at most two chunks per core, so memory stays bounded with
// eigenvectors on any grid. Both poll their context between points and,
// for matrices of cancelCheckModes modes and more, inside the solver's
// loops, so cancellation takes effect within milliseconds at any size.
//
// # Invariants
//
// D(q) is Hermitian by construction (only its lower triangle is built) and
// D(−q) = D(q)*. The p acoustic modes at Γ are zero to rounding for any
// model built from springs, and for blocks when the sum rule holds or is
// enforced. The spectrum is invariant under a rigid rotation of lattice and
// positions, a renumbering of sites, the order of springs, shells and
// blocks, and the force unit; Model.Hash is invariant under the same
// description changes except rotation and renumbering, which move
// eigenvectors, velocities and per-site results (see Hash).
package physics
