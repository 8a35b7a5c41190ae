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
// A crystal may carry polar data — every site's Born effective charge and
// the high-frequency dielectric tensor ε∞ — which the core validates,
// compiles (Options.EnforceChargeNeutrality imposes Σ Z* = 0) and hashes;
// their dipole–dipole term is a LongRange built by Options.LongRange
// (physics/polar.Builder) and added wherever D(q) and ∂D/∂q are assembled
// (longrange.go). It is not analytic at Γ: ModesToward, ModeOptions.GammaDirs
// and the samples of a path (PathSample.GammaDir) give the direction of
// approach; grids take its analytic part. Compile refuses charges without
// a builder.
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
// boundary along b₁. Components past the dimensionality d are 0. Every
// component must be finite with |qₖ| ≤ MaxQ = 1e6: ValidateQPoints, the
// list, grid and path methods return a *ValidationError otherwise, and the
// single-point methods (FrequenciesTHz, ModesAt, Point, DynamicalMatrix,
// DynamicalMatrixGrad) panic with a "physics: " message, a programmer
// error as in gonum. D(q) is periodic, and the phases are computed from qₖ
// reduced modulo 1 (exactly), so any q in the domain is as accurate as one
// in the first zone.
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
// negative frequencies, −sqrt(|λ|) (common practice). Eigenvalues within
// the solver's accuracy of zero are reported as exactly 0 (see Zero and
// imaginary modes), so every negative frequency the engine reports is a
// real instability: a point has Imaginary set when any mode is negative,
// and a model is unstable (Stability) when a mode away from the acoustic
// modes at Γ is.
//
// # Zero and imaginary modes
//
// The eigensolver is backward stable: its eigenvalues are exact for a
// matrix within about n·ε·‖D‖ of D (Golub & Van Loan, Matrix
// Computations, 4th ed., §8.3), and D itself carries the rounding of its
// sum over C cell offsets, self terms included. The engine's tolerance is
// Model.EigenTol = c·(n + C)·ε·Λ, with n the number of modes, ε = 2⁻⁵², Λ
// the Gershgorin bound on ‖D(q)‖ at every q (largest row sum of
// |Φ|/√(m_i m_j)) and c = 4; as a frequency, Model.EigenTolTHz (0.3–4e-6
// THz for the examples, whose acoustic eigenvalues at Γ come out within
// 1.3 % of it, 0 to 3.5e-17 eV/Å²/amu). After every solve:
//
//   - at a reciprocal lattice vector (q = Γ and its images), the p
//     eigenvalues of smallest |λ| that are within EigenTol are set to 0:
//     the acoustic modes, zero for any model that keeps the acoustic sum
//     rule (not zeroed when explicit blocks break it by more);
//   - anywhere, a negative eigenvalue within EigenTol is set to 0.
//
// Nothing else is touched: a small positive eigenvalue away from Γ is kept
// (a chain whose springs differ by 1e-12 keeps its modes at 1e-6 of the
// top frequency). The rule applies in every output path, because it is
// applied where eigenvalues are made: single points, streams, paths,
// grids (and so their unfolding by symmetry), Stability and the checks
// built on it, and the imaginary counts of the DOS and thermal results,
// which count every negative frequency except, as in Stability, the p
// acoustic modes at Γ (those of a sum-rule-breaking model, reported by
// SumRuleViolation instead). The thermal sums still leave out modes below
// ZeroModeTol of the highest as zero modes.
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
// # Sound velocities
//
// SoundVelocities is the long-wavelength limit ω/|q| of the p acoustic
// branches by the method of long waves (Born & Huang, Dynamical Theory of
// Crystal Lattices, ch. V): the analytic expansion D(q) ≈ D0 + iq D1 + q² D2
// along the direction, with the internal (optical) coordinates relaxed —
// the Schur complement of D0 — and the total mass of the cell; no finite
// differences. For spring models (all constants ≥ 0) the relaxation is a
// least-squares problem solved by a row-sorted, pivoted Householder QR, so
// nothing is subtracted: measured errors are a few 1e-16 relative at
// stiffness ratios of 1e-4, 1e-8 and 1e-12 (soft shear against stiff
// stretch, two springs in series), against 1.5e-6, 5e-3 and a factor of 11
// by the former finite differences. Explicit blocks go through the
// compiled force constants; when internal relaxation nearly cancels the
// unrelaxed stiffness the error grows as ε times the stiffness ratio
// (3e-5 for two springs in series at 1e-12), but the result stays
// non-negative for a model whose energy is non-negative for every
// displacement gradient. See elastic.go.
//
// # Eigensolver
//
// Complex Householder tridiagonalisation and implicit QL (root-free for
// eigenvalues only), chosen by measurement over a real 2n×2n embedding in
// gonum and a complex Jacobi method; see the header of eigen/eigen.go. In
// builds with the lapack tag (the container's), matrices of 40–64 modes and
// more go to OpenBLAS's LAPACK instead (eigen/doc.go). Every
// eigenvalue is within a few n·ε‖D‖ of exact (EigenTol above). Workspaces are reused per core:
// grid and stream loops allocate nothing per point.
//
// # Concurrency and cancellation
//
// A Model is safe for concurrent use. GridModes and StreamModes spread
// points over all cores (runtime.GOMAXPROCS); StreamModes emits chunks in q
// order and holds at most two chunks per core, so memory stays bounded with
// eigenvectors on any grid. Both poll their context between points and,
// for matrices of eigen.CancelCheckModes modes and more, inside the solver's
// loops, so cancellation takes effect within milliseconds at any size.
//
// Every parallel loop runs on one internal helper (physics/internal/parallel,
// whose doc.go is its manual). A panic in a worker does not end the
// process: it stops the other workers and is raised again, once they have
// all exited, on the goroutine that called the engine, as a *PanicError
// carrying the worker's value and stack. SetFaultHook lets tests make a
// worker panic.
//
// Every other stage whose work grows with the model or the grid takes a
// context too and returns ctx.Err() soon after it ends: Compile (the
// neighbour search and the force-constant assembly), Symmetry and
// ReduceGrid, SoundVelocities (the long-wave set-up, O(sites³)),
// Stability, and above the core spectra.ComputeDOS (including the
// tetrahedron classes) and thermo.ComputeThermal (see cancel.go). The values a Model computes on first use
// (its symmetry operations, its long-wave limit) are kept only when their
// computation finished: a cancelled first use stores nothing and the next
// call computes again, under its own context (lazy.go).
//
// # Assembly of D(q)
//
// D(q) is built from the compiled blocks grouped by cell offset, one phase
// per cell. A model with many cell offsets (folded supercell force
// constants) builds the matrices of a batch of q-points at once as two
// real matrix products, cos and sin of the phases times the blocks stacked
// by cell (gonum's Dgemm; dynbatch.go); Compile chooses that path by
// measured costs, the results agree with the loop to rounding. The mode
// loops (grids, streams, paths) hand their workers batches of points;
// every D(q) they diagonalise is completed in one place (pointWork's
// dynamical, modes.go).
//
// # Invariants
//
// D(q) is Hermitian by construction (only its lower triangle is built) and
// D(−q) = D(q)*. The p acoustic modes at Γ are exactly 0 for any model
// built from springs, and for blocks when the sum rule holds or is
// enforced (to rounding in D, set to 0 by the rule above). The spectrum is invariant under a rigid rotation of lattice and
// positions, a renumbering of sites, the order of springs, shells and
// blocks, and the force unit.
//
// # Model hash
//
// Model.Hash identifies exactly the numbers the engine computes with: the
// exact float64 bits (−0 as +0) of the lattice, the masses and fractional
// positions as given, the labels, the sum-rule violation and the non-zero
// compiled force-constant blocks in eV/Å². Two models whose results could
// differ in any digit never share a hash, however small the difference
// (results are cached by hash). Compile makes the compiled numbers
// independent of the spelling — each block is summed from its
// contributions in a canonical order, a spring is built in one orientation
// of its bond, the reverse of a block is its exact transpose — so the JSON
// spelling, the name, the order of springs, shells and blocks, a bond given
// as its reverse, a shell versus its explicit springs, a zero spring,
// enforcing a sum rule that already holds, and N/m versus eV/Å² where the
// conversion gives the same float64 all share one hash. Polar data (the
// charges as used, ε∞'s symmetric part, the neutrality violation as given,
// and the long-range method with its parameter) are appended only when
// present, so models without them hash as before they existed. Rotation and
// renumbering change it: they move eigenvectors, velocities and per-site
// results (see Hash).
//
// # Density of states and thermal properties
//
// They are computed from grid modes by the packages above the core:
// physics/spectra (ComputeDOS: tetrahedra, Gaussian, histogram,
// projections) and physics/thermo (ComputeThermal: U, F, S, Cv, θ_D,
// mean-square displacements); their doc.go files are their manuals. The
// core gives them GridModes (with the reduction they were computed with,
// GridModes.Reduction, and its cache), CheckGridModes, IsGamma and the
// elastic Debye temperature (Model.ElasticDebyeTemperature).
//
// # Symmetry and reduced grids
//
// Model.Symmetry finds the point-group operations of the whole model:
// integer lattice automorphisms R (entries −1, 0, 1; enough for a reduced
// basis) that preserve the metric, keep the first p Cartesian axes apart
// from the others, map every site onto a site of equal mass with a
// fractional translation t, and leave the force constants invariant. The
// last test is made on the dynamical matrix itself, D(Sq) = U D(q) U† at
// three random q, with S = R⁻ᵀ acting on fractional q and
// U_{π(i)α, iβ} = C_αβ exp(−2πi Sq·L_i), C the Cartesian rotation and L_i
// the cell site i lands in; so springs, shells and blocks that break an
// operation remove it. Time reversal, D(−q) = D(q)*, always holds. The
// search scales with the cell (symsearch.go): sites are matched through a
// grid of fractional positions, and a candidate is rejected from one block
// row of D or accepted from its force constants whenever either settles
// the test for certain — the operations found are exactly those of the
// direct test (checked against it, the direct search kept with the tests).
//
// Tolerance: every comparison is made within one length, Options.SymTolA
// (default DefaultSymTolA = 1e-4 Å): sites must land within it of a site
// (Cartesian, modulo the lattice); the metric, the polarisation axes and
// the force-constant test use tolerances derived from it (symmetry.go).
// The default survives coordinates typed to 5–6 significant digits (6
// decimals on a 10 Å vector: ~5e-6 Å) and stays far below real
// distortions (1e-2 Å). A model within the tolerance of a symmetric one is
// reduced with that symmetry, so its results differ from the unreduced
// computation by the model's own asymmetry (e.g. 2e-6 THz between modes
// that would be degenerate); Symmetrize makes the model exactly symmetric
// (a new model, with its own hash). A tolerance other than the default is
// part of the hash.
//
// ReduceGrid keeps the operations that map the grid onto itself and groups
// the grid into orbits under them and time reversal (integer
// multiplicities); the tables are kept, when the caller passes a
// mesh.ReductionCache, per lattice operations and grid. GridModes diagonalises one point per orbit and unfolds:
// frequencies are copied, the weight of site π(i) at Sq is that of site i at
// q, site tensors rotate as C t Cᵀ, eigenvectors as U e (conjugated under
// time reversal). Per-site weights and tensors are averaged within each
// degenerate group first — the only basis-independent choice — so the
// reduced and the full computation agree to rounding. For the total DOS
// the tetrahedra whose corners carry the same irreducible points are summed
// once with their count (exact: a tetrahedron's contribution depends only on
// its corner frequencies). Sums over slices are merged in a fixed order, so
// results are bit-for-bit independent of scheduling and core count.
//
// # Packages
//
// The engine is split by concept; arrows point one way (a package imports
// only those listed above it):
//
//   - physics/internal/parallel — the one parallel-loop helper (chunked
//     work over all cores, cancellation, panics re-raised).
//   - physics/eigen — the Hermitian eigensolver (Householder + QL, gonum
//     embedding as fallback) with a reusable workspace.
//   - physics/lattice — lattice geometry on plain vectors: 3-vector
//     helpers, reciprocal lattice, Gram measure, lattice type and built-in
//     points, default paths, the lattice's point group.
//   - physics/mesh — q-point meshes: grids, finite-crystal sets, reduction
//     by integer q-space rotations, the ReductionCache, tetrahedron
//     geometry and simplex classes.
//   - physics/fcimport — above the core, in spectra's layer: folds a
//     supercell force-constant set into the core's explicit blocks,
//     optionally averaged over the crystal's space group.
//   - physics/polar — above the core, in spectra's layer: the
//     dipole–dipole (Ewald) term of polar crystals that fills the core's
//     LongRange hook, the dipole part of supercell sets, the infrared
//     response (mode charges, ε(ω), reflectivity) and their costs.
//   - physics (this package) — the model, validation, compilation, the
//     dynamical matrix, symmetry with site maps, modes, velocities,
//     long-wave limit and elastic Debye temperature, paths, stability,
//     grid modes and their unfolding, units, and the cost estimates of
//     these computations (cost.go: Cost, GridSize, GridModesCost,
//     StreamCost, DispersionCost).
//   - physics/internal/testmodels — for tests only: the example crystals
//     compiled, crystal transformations, random models for property tests,
//     shared by the tests of spectra and thermo.
//   - physics/spectra — densities of states from grid modes (ComputeDOS:
//     linear tetrahedra with symmetry classes, Gaussian, histogram,
//     per-site and per-label projections) and their cost (DOSCost).
//   - physics/thermo — thermal properties from grid modes (ComputeThermal:
//     harmonic U, F, S, Cv; θ_D(T) with its status; Debye functions;
//     mean-square displacements) and their cost (ThermalCost); its
//     DOS-integral route uses spectra.
//   - physics/thermo/qha — the quasi-harmonic approximation: mode Grüneisen
//     parameters from models at several volumes, equation-of-state fits,
//     thermal expansion, B_T, Cp (GruneisenCost, QHACost).
//   - physics/transport — lattice thermal conductivity in the
//     relaxation-time approximation for bulk and finite samples, cumulative
//     curves (ConductivityCost).
//   - physics/fit — above thermo: weighted least-squares fits of force
//     constants to frequencies, sound velocities, elastic constants and
//     heat capacities, with standard errors (Fit), and their cost (Cost).
//     It uses the core's dynamical matrix, modes and long-wave forms
//     (LongWaveForms, forms.go); its tests check its heat capacities
//     against thermo's.
//   - physics/scatter — above thermo: neutron and X-ray one-phonon
//     scattering S(Q, E) of single crystals and powders, Debye–Waller
//     factors from thermo, the neutron-weighted DOS, a table of neutron
//     scattering lengths; their cost (scatter/cost.go).

package physics
