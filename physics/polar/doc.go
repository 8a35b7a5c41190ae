// Package polar is the long-range part of the lattice dynamics of polar
// crystals: the dipole–dipole interaction of Born effective charges
// screened by the high-frequency dielectric tensor, summed by the Ewald
// method, its non-analytic limit at Γ (LO–TO splitting), its part in the
// force constants of a supercell, and the infrared response of the Γ
// modes (mode effective charges, oscillator strengths, ε(ω), ε₀ and the
// reflectivity).
//
// The core validates and compiles the polar data (physics.Crystal's
// EpsilonInf and every Site's BornCharge; charge neutrality; the hash) and
// adds a physics.LongRange term wherever it assembles D(q); this package
// builds that term. Compile a polar crystal with
//
//	physics.Compile(ctx, c, physics.Options{LongRange: polar.Builder()})
//
// (the core refuses Born charges without a builder). The server does so
// for every model.
//
// # Units and conventions
//
// Charges in units of the elementary charge e, ε∞ dimensionless, lengths
// in Å, masses in amu, force constants in eV/Å², D(q) in eV/Å²/amu,
// frequencies in THz internally (ν = ω/2π, as the core), damping likewise
// as an ordinary frequency. The one constant used is the Coulomb constant
// e²/(4πε₀) = 14.3996454784 eV·Å (physics.CoulombEVA, from CODATA 2018 e
// and ε₀ in physics/units.go).
//
// Z*_{s,αβ} (row α, column β) is the dipole along α per unit displacement
// of site s along β — equally the force along β per unit field along α
// (X. Gonze & C. Lee, Phys. Rev. B 55, 10355 (1997)): a displaced
// site carries the dipole p_α = Σ_β Z*_{αβ} u_β. D(q) uses the core's cell
// phase convention, D_{iα,jβ}(q) = Σ_n Φ_{αβ}(0i; nj) e^{2πi q·n}/√(m_i m_j).
//
// # The dipole–dipole term
//
// Two dipoles in a medium of permittivity ε (Gaussian form, e = 1) at
// separation d interact with the energy p·T(d)·p', T = −∇∇φ, φ(d) =
// 1/(sqrt(det ε)·ρ), ρ = sqrt(d·ε⁻¹·d) (the potential of a point charge in
// an anisotropic medium). The force constants of the sites are
// Φ_{iα,jβ}(0; n) = Z_iᵀ T(R_n + τ_j − τ_i) Z_j, and their lattice sum is
// split with erfc + erf (P. P. Ewald, Ann. Phys. (Leipzig) 64, 253 (1921); for the
// screened dipole sum Gonze & Lee 1997, and S. Baroni, S. de
// Gironcoli, A. Dal Corso & P. Giannozzi, Rev. Mod. Phys. 73, 515 (2001)):
//
//   - real space: T_short = −∇∇[erfc(Λρ)/(sqrt(det ε)ρ)], written out in
//     Term.shortTensor, summed over the lattice vectors with Λρ ≤ 6;
//   - reciprocal space: the erf part's Fourier transform,
//     4π e^{−K·ε·K/4Λ²}/(K·ε·K), gives (Poisson summation, cell
//     convention) (4π/Ω) Σ_{G} (K·Z_i)(K·Z_j)* e^{−K·ε·K/4Λ²}/(K·ε·K)
//     e^{−iK·(τ_j−τ_i)} with K = q + G, over K·ε·K/4Λ² ≤ 36;
//   - the self term: the erf part's value at d → 0,
//     (4Λ³/3√π) ε⁻¹/sqrt(det ε), sandwiched by Z_i and subtracted from
//     each site's block (the reciprocal sum includes a site's own field);
//   - at q = Γ the K = 0 term is left out of the sum: it is the
//     non-analytic term, below.
//
// Everything is multiplied by e²/(4πε₀) (Gaussian e² → SI e²/4πε₀, in eV·Å)
// and divided by sqrt(m_i m_j). Terms left out by the cut-offs are below
// 2.3e-16 of the largest kept, so D(q) does not depend on Λ beyond
// rounding: TestEwaldParameterIndependence compares Λ/2, Λ and 2Λ to 1e-8
// (measured: a few 1e-14). The default Λ = √π (det ε)^{1/6}/Ω^{1/3}
// balances the numbers of terms of the two sums (DefaultLambda), raised
// when the real-space blocks would exceed 32 MiB. The lattice points tried
// lie in boxes bounding the two cut-off ellipsoids; a set-up that would try
// more than MaxCandidates is refused as a violation of "lattice".
//
// Acoustic sum rule: a rigid translation must cost nothing. With neutral
// charges the non-analytic term vanishes on it; the analytic sum does not,
// and each site's diagonal block gets minus its row sum at q = 0 (Gonze &
// Lee 1997). A row sum that is not symmetric cannot sit in a
// diagonal block of a Hermitian D: its symmetric part does, and the
// antisymmetric rest K_i (Σ_i K_i = 0) goes into constant blocks between
// the cell's sites, X_ij = (K_i − K_j)/n, the least symmetric change that
// restores every row sum (zero for sites of cubic or axial symmetry; its
// size is Term.Asymmetry). The acoustic modes at Γ are then zero to the
// solver's tolerance along every direction (TestAcousticSumRule, on a
// triclinic crystal with general charges).
//
// # The limit at Γ
//
// As q → 0 along the unit vector u the K = 0 term tends to
//
//	(4π/Ω) (u·Z_i)_α (u·Z_j)_β / (u·ε∞·u) · e²/(4πε₀) / sqrt(m_i m_j),
//
// which depends on u: the non-analytic term that splits longitudinal from
// transverse optical modes (Gonze & Lee 1997; Born & Huang,
// Dynamical Theory of Crystal Lattices, 1954, ch. V). At a reciprocal
// lattice vector the core passes the direction of approach: along a path
// each side's segment direction (a corner on Γ is sampled twice), on a
// q-point list the direction given with the point, and nothing on grids,
// where Γ takes the analytic part only — its LO–TO splitting has zero
// weight as the grid grows, so densities of states and thermal sums
// converge as for any model. Group velocities at Γ leave the non-analytic
// part out (its derivative is zero along u and undefined across it).
// Sound velocities of a polar model come from frequencies at two small q
// along the direction, extrapolated (the core's long-wave expansion holds
// short-range force constants only).
//
// # Charge neutrality
//
// Σ_s Z*_s = 0 for a crystal (the acoustic sum rule of the charges: a
// rigid translation carries no dipole). Calculated charges break it
// slightly; the core reports max |Σ_s Z*_{s,αβ}| and, when asked
// (Options.EnforceChargeNeutrality), subtracts the mean tensor from every
// site, the least change in the sum of squares that restores it. While
// it is broken the acoustic modes approached along a direction are not
// zero at Γ.
//
// # Supercell force constants
//
// A supercell calculation with periodic boundary conditions holds, for
// every pair, the sum over the supercell's images, and no macroscopic
// field: at the supercell's commensurate q it equals D(q) with the
// analytic part at Γ. SupercellPart gives that part of the dipole term,
// Φ_dd(s; t, n) = (1/N) Σ_q C_dd(q)_{st} e^{−2πi q·n}; the server
// subtracts it from the set before physics/fcimport folds it and the
// compiled model adds C_dd(q) back at every q. D(q) then equals the data's
// at every commensurate q and carries the exact long-range part between
// them (TestPolarSupercellOverGRPC: a polar model written as its 3×3×3
// set comes back to 1e-8 everywhere; folded without the charges it misses
// the LO branch near Γ by a third of the top frequency).
//
// # Infrared response
//
// Infrared diagonalises the analytic D(Γ). A mode of normalised
// eigenvector e (displacement U_s = e_s/√m_s) has the mode effective
// charge Z̃_α = Σ_{s,β} Z*_{s,αβ} U_{sβ} (e/√amu) and the oscillator
// strength S_αβ = Z̃_α Z̃_β (e²/amu) (Gonze & Lee 1997); Σ_m
// |Z̃_m|² = Σ_s tr(Z_sᵀZ_s)/m_s by completeness. A mode is infrared active
// when |Z̃|² exceeds ActiveThreshold = 1e-10 of that sum, silent otherwise.
// The dielectric tensor (Gonze & Lee 1997, with a Lorentz damping γ):
//
//	ε_αβ(ω) = ε∞_αβ + (4π/Ω) Σ_m S_m,αβ / (ω_m² − ω² − iγ_m ω)   (Gaussian),
//
// the sum over the optical modes. In SI the Gaussian e² is e²/(4πε₀), so
// 4π e²/Ω becomes e²/(ε₀ Ω): with S in e²/amu, Ω in Å³ and ω in rad/s the
// factor is e²/(ε₀ · Ω·10⁻³⁰ m³ · m_u) (m_u = 1.66053906660e-27 kg). In
// the engine's units it is 4π·CoulombEVA/Ω (eV·Å/Å³) with ω² in eV/Å²/amu,
// the eigenvalue of D: the same number. ε₀ is its value at ω = 0. For a
// cubic crystal with one active mode this gives ω_LO²/ω_TO² = ε₀/ε∞
// (Lyddane, Sachs & Teller, Phys. Rev. 59, 673 (1941)) and, for rigid ions,
// ω_LO² − ω_TO² = Z²e²/(ε_vac ε∞ Ω μ) (Born & Huang 1954): both are tested to
// 1e-8. The reflectivity at normal incidence from vacuum, light polarised
// along ê, is R = |(n − 1)/(n + 1)|², n = sqrt(ê·ε(ω)·ê) with Re n ≥ 0
// (Born & Wolf, Principles of Optics, §1.5) — exact when ê is a principal
// axis of ε(ω) (every axis of a cubic crystal), otherwise the reflectivity
// of that diagonal element alone.
//
// # Cautions
//
// A model of springs plus rigid Born charges is a harmonic, rigid-ion
// estimate: the charges do not polarise with the lattice beyond ε∞, there
// is no anharmonic damping (γ is a parameter), and the results are to be
// validated against measurements.
//
// # Cost
//
// Per q the term costs, with n sites, B real-space blocks in C cells and
// G reciprocal vectors, about 36B + 40C + G(60n + 4(3n)(3n+1)) operations
// (Flops), against 8·interactions·9 for the short-range assembly. Per
// vector the reciprocal sum takes no exponential and no sine: G·ε·G, the
// Gaussian e^{−G·ε·G/4Λ²} and the phases e^{iG·τ_s} are kept, and per q
// the cross term e^{−2G·εq/4Λ²} comes from per-axis power tables. On the
// project's machine: about 15 µs per q for the 2-site example (0.3 µs for
// its springs), 0.7 ms for 16 sites, 9 ms for 54 (DEVELOPERS.md has the
// table; BenchmarkPerQ). The set-up keeps the blocks (96 B each, at most
// 32 MiB), the vectors with their phases, and BuildCost estimates it.
//
// # Invariants
//
// D(q) with the term is Hermitian, D(−q) = D(q)*, periodic in q, and
// independent of Λ to rounding; the acoustic modes at Γ are zero for
// neutral charges along every direction; with zero charges the term
// vanishes. Model.Symmetry sees the term (it tests D(q) itself), and
// Symmetrize averages charges and ε∞ over the group.
package polar
