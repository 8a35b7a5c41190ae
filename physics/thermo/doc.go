// Package thermo computes the harmonic thermal properties of a crystal
// from the modes of a grid (physics.GridModes): internal and free energy,
// entropy, heat capacity, the Debye temperature θ_D(T) with a status
// saying when the grid determines it, the Debye functions, and
// mean-square displacements with the Debye–Waller factor; and the cost
// estimate of that computation (ThermalCost), for admission control.
//
// It imports physics/spectra (the DOS-integral route and the scan of grid
// frequencies), the core (grid modes, the elastic Debye temperature
// Model.ElasticDebyeTemperature, units) and the leaves; nothing of the
// engine imports it.
//
// # Units and conventions
//
// Energies in eV per cell, entropies and heat capacities in eV/K per cell
// (physics.EVToKJPerMol, physics.EVPerKToJPerMolK per mole of cells),
// temperatures in K, displacements in Å². Bad options give a
// *physics.ValidationError naming every field at once; an unstable grid
// without AllowUnstable is an error wrapping ErrUnstable.
//
// # Sums
//
// ComputeThermal gives, per cell, the harmonic internal energy U and
// Helmholtz free energy F (both with the zero-point energy Σ hν/2), the
// entropy S and the heat capacity at constant volume Cv, in eV and eV/K
// (per mole of cells: EVToKJPerMol, EVPerKToJPerMolK), at T ≥ 0 K:
//
//	U = Σ w hν (½ + n),  F = Σ w [hν/2 + kT ln(1 − e^(−x))],
//	S = k Σ w [x n − ln(1 − e^(−x))],  Cv = k Σ w x² n (1 + n),
//
// with x = hν/kT, n = 1/(eˣ − 1) and w the weight of the mode's q-point
// (1/N on a grid). T = 0 gives U = F = ZPE and S = Cv = 0. Only the p
// acoustic modes at Γ (translations, zero to rounding) and modes of zero or
// negative frequency are left out — every positive mode is summed, however
// far below the highest, as the DOS keeps it — and so are imaginary modes when
// AllowUnstable (counted in ImaginaryExcluded); without it an unstable grid
// is an error wrapping ErrUnstable. The default route is the exact sum over
// the grid's modes (for a finite crystal, over its allowed modes, so small
// crystals show their real low-T deviation from the bulk); it is evaluated
// by Taylor series of n over groups of modes of similar frequency, equal to
// the mode-by-mode sum to rounding (1e-11 is tested). DOSIntegral
// integrates a 2000-bin tetrahedron DOS by the midpoint rule instead: it
// smooths a coarse grid but needs kT well above the bin width.
//
// θ_D(T) is the temperature θ for which the Debye model of the crystal's
// dimensionality d, C/(k per mode) = (d+1)D_d(θ/T) − d(θ/T)/(e^(θ/T) − 1)
// with the Debye function D_d of Abramowitz & Stegun §27.1, has the model's
// heat capacity per mode at T. It comes with a ThetaStatus: at T = 0 it is
// the elastic θ_D, its limit; where the grid cannot determine it (lowest
// grid mode above 4 k_BT/h, or the Γ modes left out shifting it by more
// than 1 %, or Cv per mode too near 0 or 1 for the inversion) it is 0 with
// the reason. The DOS route's tetrahedra touching Γ undercount the acoustic
// states below the first grid shell (θ_D → 370 K instead of 314.6 K for the
// fcc example), so it is trusted only for x₁ ≤ 1. ThetaElasticK is θ_D of the
// elastic limit: the Debye model whose low-frequency DOS matches the
// sound velocities of the acoustic branches (physics.Model.SoundVelocities,
// averaged over directions), ν_D^d = d·p·sites/(V S_d Σ_s ⟨v_s^(−d)⟩),
// S_d = 2, 2π, 4π; θ_D(T) tends to it as T → 0 in the bulk.
//
// With MSD, ⟨u uᵀ⟩ of every site (Å²) is Σ w ħ/(2 m_s ω) coth(ħω/2kT)
// Re(e_s e_s†) over the grid's modes (GridOptions.Eigenvectors), and B =
// 8π²⟨u²⟩/3 = 8π² trace/3 is the isotropic Debye–Waller factor (Willis &
// Pryor, Thermal Vibrations in Crystallography, ch. 4). It is a mode sum on
// both routes. In one dimension ⟨u²⟩ of an infinite crystal diverges at
// every T (zero-point ∝ ln N, thermal ∝ N on an N-point grid), in two at
// T > 0 (∝ ln N) (Peierls 1934; Mermin & Wagner 1966): such sums are
// flagged SiteMSD.Divergent with the reason. In three it converges,
// slowly, because of the 1/ω² weight near Γ.
//
// # Invariants
//
// F = U − TS at every temperature; the tree (Taylor series) and direct
// evaluations agree to 1e-11; sums are merged in a fixed order, so results
// do not depend on scheduling or core count.
package thermo
