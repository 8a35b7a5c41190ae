// Package qha is the quasi-harmonic approximation: the crystal's modes at
// several volumes give mode Grüneisen parameters, and with the static
// energy of each volume the free energy F(V, T), whose minimum at each
// temperature gives the thermal expansion, the isothermal bulk modulus
// and the heat capacity at constant pressure.
//
// It imports physics/thermo (the harmonic free energy, entropy and heat
// capacity of each volume), the core (models, modes, grids) and the leaves;
// nothing of the engine imports it. Every computation has a cost
// estimator beside it (cost.go: GruneisenCost, QHACost).
//
// # Units and conventions
//
// Volumes in Å³ per cell (the cell measure: Å² and Å for 2D and 1D models
// in the Grüneisen part, which any dimensionality may use; the
// quasi-harmonic fit is for 3D crystals), energies in eV per cell,
// entropies and heat capacities in eV/K per cell (×
// physics.EVPerKToJPerMolK per mole of cells), bulk moduli and pressures
// in GPa (1 eV/Å³ = 160.2176634 GPa, EVPerA3ToGPa), expansion
// coefficients in 1/K, temperatures in K, frequencies in THz.
//
// A VolumeSet holds one crystal's models at different volumes: the same
// sites in the same order with equal labels and masses, only lattice and
// force constants differing. Models are sorted by volume; the caller's
// order is kept in VolumeSet.Index, and field paths of violations use it
// ("models[3]", "static_energies_ev[3]").
//
// # Mode Grüneisen parameters
//
// γ = −∂ln ω/∂ln V (Grüneisen, Ann. Phys. 344, 257 (1912); Ashcroft &
// Mermin, Solid State Physics, ch. 25) at the reference volume (the
// middle one by default), by finite differences in ln V: the two-point
// difference for two volumes, otherwise the three-point Lagrange
// derivative on the uneven spacing — central around the reference, one-sided
// when it is the smallest or the largest volume. At every q the modes of
// each volume are matched to the reference's by the overlap of their
// eigenvectors, the assignment maximising Σ|⟨e_ref,k|e_V,π(k)⟩|² (the
// Hungarian method, Kuhn 1955), not by sorting: branches that cross
// between volumes keep their identity (TestGammaFollowsCrossingBranches).
// ModeGammas.MinOverlap reports the weakest match; values well below ½
// mean the volumes are too far apart. Modes degenerate at the reference
// volume get their group's mean γ. A mode of zero or imaginary frequency
// at any volume (the acoustic modes at Γ) has no γ (Defined false, value
// 0). AverageGamma is the thermodynamic mean Σ C γ/Σ C weighted by the
// modes' heat capacities.
//
// # Quasi-harmonic thermodynamics
//
// Compute fits, at each temperature, F(V_i, T) = E(V_i) + F_vib(V_i, T)
// (E the caller's static energies; F_vib with zero-point energy from
// thermo.ComputeThermal on each volume's grid) with the chosen equation of
// state — Vinet, Ferrante, Rose & Smith, J. Geophys. Res. 92, 9319 (1987),
// by Levenberg–Marquardt, or the third-order Birch–Murnaghan form (Birch,
// Phys. Rev. 71, 809 (1947)), a cubic in V^(−2/3) fitted by linear least
// squares — and finds V(T) where the fitted pressure equals the requested
// one (the minimum of G = F + PV). Then B_T = V d²F/dV² at V(T); α_V =
// (∂S/∂V)_T/B_T from a least-squares polynomial (degree min(3, n−2)) of the
// harmonic entropies over V — the Maxwell relation (∂S/∂V)_T = (∂P/∂T)_V =
// α B_T, so α needs no difference quotient in T and is exactly 0 at T = 0;
// α_L = α_V/3 (volumes are taken as scaled copies of one cell); Cv at V(T)
// from the same kind of fit; Cp = Cv + α² B_T V T; the thermodynamic γ =
// α B_T V/Cv. Each point reports the equation of state's parameters at that
// temperature with its RMS and largest residual, and the RMS residual of
// the entropy fit.
//
// A minimum outside the volumes given is reported with Bracketed false and
// a Warning (the values are then the equation of state's extrapolation,
// never passed off silently); where no minimum exists within a factor of
// two of the volumes, Found is false, the numbers are 0 and the Warning
// says why.
//
// # Checks
//
// On a crystal whose springs all scale as V^(−s), γ = s/2 for every mode
// in closed form; the package's mode γ agree to 1e-9 and the thermodynamic
// γ(T) to 0.5 % (measured 1.49997–1.50006 for s = 3). Cp agrees with
// T(∂S/∂T)_P along the isobar and α with (1/V)(∂V/∂T)_P, both by difference
// quotients (qha_test.go). Equation-of-state fits of exact data return
// their parameters.
package qha
