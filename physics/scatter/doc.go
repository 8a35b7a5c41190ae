// Package scatter computes what a neutron or X-ray experiment on a crystal
// sees of its phonons: the coherent one-phonon scattering function S(Q, E)
// of a single crystal at any Q (ComputeSingle: lists, paths and slices of
// Q), its powder average S(|Q|, E) (ComputePowder) and the neutron-weighted
// density of states (ComputeWeightedDOS), broadened by an instrument's
// Gaussian resolution; with the Debye–Waller factors from the mean-square
// displacements of physics/thermo, a built-in table of neutron scattering
// lengths, X-ray form factors given by their coefficients, and the cost
// estimates of these computations (cost.go), for admission control.
//
// It imports physics/thermo, physics/spectra, the core and the leaves;
// nothing of the engine imports it.
//
// # Units
//
// Q in Å⁻¹ (2π included) when Cartesian, or in reciprocal-lattice units
// (QConv: fractional coordinates of the model's reciprocal vectors, or (h,
// k, l) in units of 2π/a of a conventional cube); energies E in meV, or as
// hν in THz or hν/hc in cm⁻¹ (Axis.Unit); coherent scattering lengths b in
// fm; cross-sections σ in barn (1 barn = 100 fm²); masses in amu;
// temperatures in K; mean-square displacements in Å²; X-ray form factors in
// electrons. Constants come from physics/units.go (CODATA 2018): the
// recoil ħ²/(2 m_u Å²) = 2.0901 meV.
//
// # The scattering function and its normalisation
//
// Energy transfer E > 0 means the sample gains a phonon (the probe loses
// E). With the engine's eigenvectors e_s(q) of D(q) and the mode
// frequencies ν_s (E_s = hν_s), the amplitude of mode s at Q = G + q, any
// zone, is (Squires, Introduction to the Theory of Thermal Neutron
// Scattering, ch. 3, eq. 3.120)
//
//	F_s(Q) = Σ_j (b_j/√m_j) e^{−W_j(Q)} (Q·e*_js) e^{iQ·r_j},   W_j = ½ Q·U_j·Q,
//
// and the scattering function per cell
//
//	S(Q, E) = Σ_s ħ²|F_s(Q)|²/(2E_s) [(n_s + 1) R(E − E_s) + n_s R(E + E_s)],
//
// with n_s = 1/(e^{E_s/k_BT} − 1) and R the normalised resolution function
// (a Gaussian). The weight of each line (Lines) is ħ²|F_s|²/(2E_s)·(n_s+1)
// or ·n_s: dimensionless times b², so S is in barn/(sr·meV) per cell (per
// axis unit for THz, cm⁻¹) for neutrons. This is Squires's coherent
// one-phonon cross-section per cell divided by k′/k, with its wavevector
// δ-function (2π)³/v₀ Σ_τ δ(Q − q − τ) taken as 1 — its average over one
// Brillouin-zone volume of Q — so a crystal of N cells scatters N·(k′/k)·S
// into a Q-volume of one zone around Q. A cell of Z formula units gives Z
// times the per-formula-unit value. For X-rays b_j is the form factor
// f_j(|Q|) in electrons and S is in electrons²/meV per cell: multiply by
// the Thomson cross-section r_e² and the polarisation factor for
// barn/(sr·meV). Check: for one site, ∫ E S dE = b² e^{−2W} ħ²Q²/2M at any
// T (the first-moment sum rule; single_test.go).
//
// Modes of zero energy (the acoustic modes at Q = G: the Bragg position,
// where the one-phonon term is not defined) have no line; imaginary modes
// make the computation fail with an error wrapping thermo.ErrUnstable,
// unless AllowUnstable leaves them out (counted). Within a group of
// degenerate modes (frequencies within 1.5e-7 of the largest |ν| at the
// Q, about 1e-6 THz for the examples) each mode gets the group's mean
// weight: the sum is basis-independent, the parts are not.
//
// # Phase convention
//
// physics/dynmat.go builds D(q) in the cell convention, D_{iα,jβ}(q) =
// Σ_n Φ_αβ(0i; nj) e^{2πi q·n}/√(m_i m_j) with n the integer cell offset
// (physics/doc.go): site j of cell l moves as e_j e^{iq·R_l}/√m_j, its
// position inside the cell absent from e. The site positions therefore
// enter F explicitly, as e^{iQ·r_j} = e^{2πi Q_f·x_j} (Q_f fractional, x_j
// the site's fractional position); D and e are periodic in q, so the modes
// at Q itself are used. (In the position convention the eigenvectors
// carry e^{−iq·r_j} and the factor is e^{iG·r_j}: the same F.) Tested
// where it matters: a crystal given by a supercell scatters exactly as its
// primitive cell at any Q (single_test.go).
//
// # Debye–Waller factors
//
// U_j = ⟨u_j u_jᵀ⟩ at T from thermo.ComputeThermal (mode sum over a
// Γ-centred grid, the acoustic modes at Γ left out). Default grid 24³
// (DefaultDWMesh); in 3D at T > 0 the thermal part, whose grid error falls
// only as 1/N (the missing Γ cell), is extrapolated from N and N/2 (see
// DebyeWaller): within 0.11 % of the extrapolation from 48³ for the
// examples at 300 K (plain 24³: 3.6 % low). One- and two-dimensional
// crystals have no finite ⟨u²⟩ (at T > 0 in 2D, always in 1D): the
// computation then fails wrapping ErrDivergentMSD, and DWOptions.Off gives
// the bare intensities (W = 0).
//
// # Scattering lengths
//
// Each site scatters with a SiteScatterer, given by the caller or taken
// from the built-in table (Lookup, lengths.go) by its label's element
// symbol ("Si", "O2", "Fe_a"): bound coherent lengths and cross-sections
// of the elements in natural abundance from V. F. Sears, Neutron News
// 3(3), 26 (1992), checked against the compilation of Rauch & Waschkowski
// (ILL Neutron Data Booklet, 2003). The table is used only when the site's
// mass is within 0.5 % of the element's atomic weight (an isotope has
// other lengths); otherwise, or for a label that is no element of the
// table, the error asks for the length. X-ray form factors are only ever
// the caller's: the four-Gaussian-plus-constant form of International
// Tables for Crystallography Vol. C, Table 6.1.1.4, or a constant.
//
// # Energy axis and resolution
//
// Samples Min + i·Step in the axis unit; Min = Max = 0 for 0 … 1.15 ×
// the highest mode (of the Q points, or of an 8^d grid for a powder);
// Step 0 for 200 steps. Each line becomes a normalised Gaussian of
// FWHM(E) = Σ cᵢ Eⁱ (at most a cubic, evaluated at the line's energy
// clamped into the window, checked positive over the window; default a
// constant 2·Step), sampled at the axis energies when its σ ≥ Step and
// bin-averaged otherwise, so Σ S·Step over a window holding the lines is
// their weight. A powder map may add a constant Gaussian FWHM in |Q|.
// Step, every FWHM and the |Q| FWHM are at least MinEnergy (1e-12 of their
// unit; the window from the modes is at least 200·MinEnergy wide), and
// lengths, cross-sections and form-factor coefficients are 0 or of a size
// in [MinScatter, MaxScatter] = [1e-6, 1e6], with the form factor's
// exponents b ≥ 0: far from the smallest and largest floating-point
// numbers.
//
// # Powder average
//
// S(|Q|, E) = (1/4π)∫dΩ S(|Q|n̂, E) by a spherical Fibonacci set of N
// equal-weight directions, of which only those in the fundamental domain
// of the crystal's point group and −1 (S(−Q) = S(Q)) are computed; N
// doubles from 64 until a row changes by less than Tolerance (relative L1,
// default 2 %) or reaches MaxDirections (default 2²⁰; the rows that do are
// counted). On the rock-salt-like example the change overstates the error
// against a 2¹⁷-point reference by 2–4 times.
//
// A neutron map holds, besides, the incoherent one-phonon term of every
// site with a cross-section σ_inc (unless PowderOptions.CoherentOnly),
// since a measured map holds both (Squires ch. 3):
//
//	S_inc(|Q|, E) = Σ_j (σ_inc,j/4π) e^{−Q²ū_j} (ħ²Q²/2m_j) g_j(E)/(3E) (n(E) + 1)   (E > 0; n(|E|) at E < 0),
//
// g_j the site's projected tetrahedron DOS on the Debye–Waller grid
// (default 24³; bins of the axis step up to the highest mode, or to the
// reach of a line beyond the window), ū_j = tr U_j/3: exact in the one-phonon term for a
// site of cubic symmetry, with the direction average of e^{−Q·U·Q} taken
// as e^{−Q²ū} otherwise. Its first moment is (σ_inc/4π)e^{−2W}ħ²Q²/2M per
// site, tested. The same expression with 4πb² in place of σ_inc is the
// incoherent approximation of the coherent term: at large |Q|, averaged
// over a band of several zones, the coherent map of a one-site cubic crystal
// equals it (powder_test.go: 0.45 % against a 48³ DOS, 0.62 % against the
// engine's incoherent term on 24³).
//
// # Neutron-weighted DOS
//
// G(E) = Σ_j (σ_j/m_j) g_j(E), σ_j = 4πb_j² + σ_inc,j the site's total
// bound cross-section and g_j the tetrahedron DOS projected on site j
// (physics/spectra), in barn/amu per meV per cell, broadened with the
// resolution; also normalised to p × sites states.
//
// # Invariants
//
// Per Q, the first moment of the lines of a one-site crystal is b²e^{−2W}
// ħ²Q²/2M exactly; S(−Q, −E) = e^{−E/k_BT} S(Q, E) line by line; S does
// not depend on the choice of cell (per cell: S of a supercell of M cells
// is M times the primitive one). Results do not depend on scheduling: every
// Q point and every powder row is computed on its own. No result holds a
// NaN or ±Inf: a model so soft (force constants near 1e-200 eV/Å²) that a
// weight ∝ k_BT/E² or a mean-square displacement leaves the range of the
// numbers fails with an error wrapping ErrOverflow.
package scatter
