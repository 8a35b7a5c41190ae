// Package transport computes the lattice thermal conductivity of a crystal
// in the relaxation-time approximation of kinetic theory, for bulk samples
// and finite ones (films, wires, grains), with scattering rates from
// published models combined by Matthiessen's rule; and the cumulative
// conductivity against mean free path and frequency.
//
// It imports physics/thermo (its instability error), physics/spectra (the
// DOS of the point-defect rate), the core (modes, group velocities, the
// elastic Debye temperature) and the leaves; nothing of the engine imports
// it. Its cost estimator is ConductivityCost (cost.go).
//
// # Units and conventions
//
// κ in W/(m·K), a 3×3 Cartesian tensor (row-major) and its mean trace/3;
// sample sizes and mean free paths in m; rates in 1/s; frequencies ν in
// THz (ω = 2πν); temperatures in K; velocities in km/s at the interface (m/s
// inside); masses in u; mass variances g₂ and Γ dimensionless. 3D crystals
// with three polarizations only.
//
// # Formula
//
//	κ_αβ(T) = (1/(N V)) Σ_{q,j} C_qj v_qj,α v_qj,β τ_qj,  C = k_B x² eˣ/(eˣ−1)²,
//
// x = hν/k_BT, over every point of the grid (N points; no symmetry
// reduction, the velocities being vectors), V the cell volume. Modes of
// zero frequency (the acoustic modes at Γ) carry nothing; imaginary modes
// are an error (thermo.ErrUnstable) unless AllowUnstable leaves them out.
// Velocities are the engine's group velocities (Hellmann–Feynman); inside
// a degenerate subspace they follow one fixed generic direction
// (physics/velocity.go), which breaks the crystal's symmetry in the mode
// sum (4 % on a Γ-centred 6³ grid of the fcc example, 1e-7 on a shifted
// 64³ one), so κ is averaged over the crystal's point group, (1/|G|) Σ R κ
// Rᵀ — for a film over the operations that keep its normal. 1/τ = Σ of
// the rates below (Matthiessen's rule; Ziman, Electrons and Phonons, 1960,
// ch. 8).
//
// # Rates
//
//   - Boundary (Casimir, Physica 5, 495 (1938)), per sample geometry
//     (Boundary): film of thickness L with unit normal n, F_p 2|v·n|/L;
//     wire of diameter L, F_p |v|/L; grain of size L, F_p |v|/L; F_p =
//     (1−p)/(1+p) for the specular fraction p (Berman, Foster & Ziman, Proc.
//     R. Soc. A 231, 130 (1955)).
//   - Point defects and isotopes (Klemens, Proc. Phys. Soc. A 68, 1113
//     (1955); Tamura, Phys. Rev. B 27, 858 (1983)): (π/6)V_a Γ ω² g(ω) with
//     the model's DOS (tetrahedra; the elastic-limit Debye DOS where the
//     grid cannot resolve the long waves), reducing to Klemens' V_aΓω⁴/(4πv̄³)
//     at low frequency. Γ from a g₂ per site, or from the natural isotopes of
//     the element each site's label names (NaturalIsotopes: IUPAC isotopic
//     compositions, Rosman & Taylor 1998; masses AME1995, Audi & Wapstra;
//     transcribed from the NIST compilation of both). An element not in the
//     table is an error asking for g₂.
//   - Umklapp, in the empirical form used by Slack (Slack & Galginaitis,
//     Phys. Rev. 133, A253 (1964); Slack, Solid State Physics 34, 1 (1979)):
//     b ħγ²ω²T e^(−θ/3T)/(M̄ v̄² θ), with b = 1 unless given, θ the acoustic
//     Debye temperature θ_D n^(−1/3), v̄ the Debye mean sound velocity, M̄ the
//     mean atomic mass — each taken from the model unless given — and γ for
//     the crystal, per branch, or per mode (from models at other volumes:
//     physics/thermo/qha). The constant b and γ are what a fit to measured
//     conductivities adjusts: the form is empirical.
//   - A user power law A (ν/1 THz)ⁿ (n = 0: a constant rate).
//
// # Cumulative curves
//
// At one temperature, for each sample geometry: κ (trace/3) carried by
// modes of mean free path Λ = |v|τ up to each of log-spaced lengths, and by
// modes of frequency up to each of evenly spaced frequencies; both end at κ.
//
// # Checks
//
// Casimir's limit κ → (L/3)(2π²/15)(k_B⁴T³/ħ³)Σ_s c_s⁻² of an elastically
// isotropic crystal (sound velocities from its springs) within 0.2 % at
// 6 K and 0.4 % at 8 K on a 64³ grid, exponent of T 3.03; Umklapp alone
// ∝ e^(θ/3T)/T at 10–40 θ_D, exponent −1.0179 against −1.0180 derived;
// the point-defect rate equal to Klemens' in the elastic limit (1e-9) and
// ∝ ω^4.06 where tetrahedra resolve it; natural Si and Ge g₂ = 2.005e-4
// and 5.878e-4 (conductivity_test.go).
package transport
