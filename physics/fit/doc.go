// Package fit fits the force constants of a model to measured data —
// phonon frequencies along the zone and at Γ, sound velocities, elastic
// constants, heat capacities — by weighted least squares, and reports the
// fitted parameters with honest uncertainties; and the cost estimate of a
// fit (Cost), for admission control.
//
// It imports the core (compile, dynamical matrix, modes, long-wave forms,
// units), the leaves (the eigensolver, lattice helpers, grids, the
// parallel loop) and gonum; nothing of the engine imports it.
//
// # Overview
//
// A Problem names a starting Crystal, its free parameters by path (with
// optional bounds, and ties that make other parameters follow them), and
// the data, each with its standard uncertainty σ. Fit minimises
//
//	χ² = Σ_i ((y_i − f_i(x))/σ_i)²
//
// over the free parameters x by Levenberg–Marquardt with analytic
// derivatives, and returns a Result: the parameters with standard errors,
// the correlation matrix, χ² and χ²/dof, a residual per datum, the
// parameter combinations the data do not determine, and the fitted model
// (Crystal and compiled Model, whose hash the service hands out).
//
// # Units and conventions
//
// Parameters are in the model's force unit (eV/Å² or N/m, Crystal.ForceUnit)
// and stay so: a fitted model is the starting one with new numbers in the
// same places. Frequencies are ordinary frequencies ν in THz (callers
// convert other units before), wavevectors fractional reciprocal
// coordinates as everywhere in the engine, sound velocities km/s along a
// Cartesian direction (projected onto the lattice's span as
// physics.Model.SoundVelocities does), elastic constants GPa in Voigt
// notation (1 = xx, 2 = yy, 3 = zz, 4 = yz, 5 = xz, 6 = xy), heat
// capacities at constant volume in J/(K·mol of atoms), J/(K·mol of cells)
// or J/(K·kg) as the set says, temperatures K. Branches are 1-based in
// ascending frequency (or speed) at their wavevector (direction), as the
// outputs of the service number them.
//
// No model is compiled inside the loop: D(x; q) = D₀(q) + Σ x_j D_j(q)
// from the zero model (every free parameter 0) and the unit-parameter
// models (Derivatives below), compiled once, and the long-wave forms
// likewise; the fitted model is compiled at the end. Frequencies follow
// the engine's zero rule (physics/doc.go) with a tolerance bounding the
// model's own, so they equal the fitted model's to rounding.
//
// # Parameters
//
// A path names one number of the model by its place in the model file,
// with the protobuf field names (the JSON spellings kLong, kTrans are read
// too): springs[i].k_long, springs[i].k_trans, shells[i].k_long,
// shells[i].k_trans, blocks[i].phi[k] (k = 0..8, row-major), and on a
// polar model sites[i].born_charge[k] (k = 0..8, the row-major Born
// effective charge in e, bounded by physics.MaxBornCharge). A tie sets
// another path to Ratio × a free parameter (Ratio 1: equal); its value in
// the starting model is replaced. Bounds are optional, inclusive, and the
// model's force limit (physics.MaxForceEVPerA2, in the model's unit)
// bounds every parameter and tied value.
//
// # Data and branch assignment
//
// A frequency with a branch is compared with that branch. Without one it
// is assigned at every evaluation to the nearest model branch — a lone
// datum at its wavevector to the nearest frequency — and the data at one
// wavevector one to one (below); at Γ the p acoustic branches (zero by
// the sum rule) are never assigned. With a polarisation hint, a datum is matched only among
// branches of that character: longitudinal when the mass-weighted
// displacement (the eigenvector of D) lies mostly along q̂,
// Σ_sites |q̂·e_s|² ≥ ½, transverse otherwise; when no branch has the
// character, the one nearest to it. Sound velocities are assigned among
// the p acoustic branches the same way (character from the polarisation
// vector U·û). The data at one wavevector take distinct branches (each
// branch several when there are more data than branches), by the
// assignment of least χ² (Hungarian method): χ², a minimum over
// assignments of smooth functions, stays continuous where branches cross,
// but has kinks there, and the assignment is a freedom the fit uses (χ²
// comes out a little low: the scaled errors of TestCoverage about 4 %
// below the spread of its estimates, the unscaled ones within 2.5 %). Data
// on crossing or nearly degenerate branches can leave the fit in a local
// minimum that depends on the start (3 % of the noisy fits of the
// coverage test stopped elsewhere from a start 10–30 % off than from the
// truth); a datum whose branch is known is best given it.
//
// Elastic constants are those the long waves of the model define: the
// least-squares tensor of full Voigt symmetry whose Christoffel matrices
// Γ(u) = C(u)/V (C(u) the relaxed long-wave matrix of the core's method of
// long waves, V the cell volume) reproduce the model's, ρv² being the
// eigenvalues of Γ. They need d = 3 and p = 3. When the model's long-wave
// tensor has the symmetry of an elastic tensor (for instance a model in
// equilibrium without initial stress, Born & Huang ch. V, §26) they are
// its elastic constants exactly; otherwise the nearest such tensor.
//
// Heat capacities are the harmonic mode sum of package thermo, C_V = k Σ
// w x² eˣ/(eˣ − 1)², x = hν/kT, over a Monkhorst–Pack grid the set names
// (the thermal command's sums on the same grid give the same numbers,
// tested to 1e-10): the p acoustic modes at Γ and modes of zero or
// imaginary frequency are left out. The grid is summed without symmetry
// (a fitted parameter may break it) but for time reversal, q and −q
// counted once.
//
// # Method
//
// Levenberg–Marquardt (K. Levenberg 1944; D. W. Marquardt, J. Soc. Indust.
// Appl. Math. 11, 431 (1963)) on the column-scaled problem: J̃ = (J/σ)·D⁻¹
// with D the column norms of J/σ (Marquardt's scaling: the damping acts
// alike on parameters of any size), the step δ̃ = (J̃ᵀJ̃ + μI)⁻¹J̃ᵀr from
// the SVD of J̃, μ₀ = 10⁻³ and Nielsen's update of μ from the gain ratio
// (K. Madsen, H. B. Nielsen & O. Tingleff, Methods for Non-Linear Least
// Squares Problems, 2nd ed., 2004, §3.2). A step is clipped into the
// bounds; a parameter on a bound whose descent direction leaves the box
// is held for that step. Only steps that lower χ² are taken; a step at
// which the model has no long-wave limit (an explicit block made
// asymmetric) is refused like one that raises χ². The fit ends when χ²
// is zero to rounding, the gradient vanishes, the scaled step falls below
// 1e-12 of the scaled parameters, χ² changes by less than 1e-14 relative,
// no damping finds a lower χ² (μ > 1e16: the minimum to rounding), or at
// the evaluation limit (Result.Converged false).
//
// # Derivatives
//
// All parameter kinds of the table in params.go enter the force constants
// linearly, and the compile is linear in the force constants (spring
// blocks, the acoustic-sum-rule self terms, symmetrised on-site blocks,
// unit conversion). So ∂D(q)/∂x_j is exactly D(q) of the unit-parameter
// model: the starting model with every force constant 0 but the members of
// parameter j (the free number and its ties) at their factors, compiled
// once with the same options (its on-site blocks given or left to the sum
// rule as in the model itself). The same holds for the long-wave forms.
//
//   - Frequencies: ∂λ/∂x = eᴴ(∂D/∂x)e (Hellmann–Feynman) and ∂ν/∂x =
//     ν_u² ∂λ/∂x / 2|ν| (ν_u = physics.NuUnitTHz; also for imaginary modes,
//     reported negative). Within a degenerate group (eigenvalues within
//     1e-8 of the largest |λ| plus the solver's tolerance) the derivatives
//     are the eigenvalues of E_gᴴ(∂D/∂x)E_g, ascending, the one at the
//     branch's place: the slope of the sorted eigenvalue along +x (first-
//     order degenerate perturbation theory), so a degeneracy that a
//     parameter splits is followed one-sidedly, and one it keeps is exact
//     both ways. A mode at exactly zero frequency gets 0.
//
//   - Sound velocities and elastic constants: the relaxed long-wave tensor
//     G = G2 − Y'ᵀΦ0'⁺Y' (site 0 held) is a minimum over the internal
//     displacements, so its derivative is the derivative of the energy form
//     at the relaxed displacements W = −Φ0'⁺Y' (the envelope theorem):
//     ∂G = ∂G2 + Wᵀ∂Y' + ∂Y'ᵀW + Wᵀ∂Φ0'W. Speeds follow by Hellmann–Feynman
//     on C(u) = Σ u_α u_β G_αβ (degenerate groups as above), elastic
//     constants linearly from ∂G.
//
//   - Heat capacities: ∂C_V/∂x = Σ w (∂c/∂ν)(∂ν/∂x) over the modes of the
//     sum, ∂ν/∂x by Hellmann–Feynman per mode; within a degenerate group
//     only the group's trace enters (every mode has the same ∂c/∂ν), so
//     the diagonal elements eᴴ(∂D/∂x)e suffice.
//
//   - Born charges: the dipole–dipole term of physics/polar is bilinear
//     in the charges (every piece of it, the sum-rule correction included;
//     its cut-offs depend on the cell and ε∞ only), and so is it after the
//     neutrality correction Z − mean(Z). With Z(x) = Z₀ + Σ x_a E_a the
//     term is M(Z₀) + Σ x_a 2B(Z₀, E_a) + Σ_ab x_a x_b B(E_a, E_b), B its
//     bilinear form, obtained once from models with zero force constants
//     and charges only by the polarisation identity B(U, V) = [M(U + V) −
//     M(U − V)]/4 — exact for a quadratic M, not a finite difference
//     (charges.go derives it). ∂D/∂x_a = 2B(Z₀, E_a) + 2Σ_b x_b B(E_a,
//     E_b) enters Hellmann–Feynman as above. The unit models of the force
//     constants are compiled without charges (the term does not depend
//     on them) and the zero model holds M(Z₀). A tie never joins a charge
//     and a force constant. Γ data of a polar model are frequencies of
//     the analytic D(Γ) (no direction: the transverse optical modes at
//     the zone centre, as infrared absorption sees them); sound velocities
//     and elastic constants of a polar model are refused (the long-wave
//     forms are short-range only).
//
// TestDerivativesAgainstFiniteDifferences checks every parameter kind on
// every data kind against central differences (1e-6 relative), and
// TestChargeDerivativesAgainstFiniteDifferences the charges on every data
// kind a polar fit takes, with and without neutrality enforced.
//
// # Uncertainties
//
// At the end, with J the Jacobian over the parameters not held at a bound
// and W = diag(1/σ²), the covariance is (JᵀWJ)⁻¹, from the SVD of the
// column-scaled J̃ (Press et al., Numerical Recipes, 3rd ed., §15.4–15.6):
//
//   - StdErrUnscaled is the square root of its diagonal: the σ taken as the
//     true absolute uncertainties of the data.
//   - StdErr is that times sqrt(χ²/dof), dof = N − r (N data, r the rank of
//     J): the σ taken as relative weights, their scale set by the scatter
//     of the data about the fit. The two agree when χ²/dof ≈ 1. A caller
//     who trusts the σ uses the unscaled errors; with χ²/dof far from 1
//     the model or the σ are wrong, and the scaled errors are the honest
//     ones (they grow with the misfit).
//   - Correlation is the covariance normalised by its diagonal.
//
// Singular values of J̃ below 1e-8 of the largest (JᵀWJ's condition number
// over 1e16: its inverse would be rounding) are directions the data do not
// determine. The parameters with weight in them are reported not
// determined (no standard error), grouped by the projector onto those
// directions, each group with the combinations the data do determine
// (value ± error) and the directions along which χ² is flat: two springs
// on one bond come out as "k₁ + k₂ determined, k₁ − k₂ flat". The
// covariance is then the pseudo-inverse over the determined directions.
// A parameter that ends on a bound of its own is held there, reported
// AtBound, and left out of the covariance (its error is not a Gaussian's).
// Errors are norms of the rows of a factor of the covariance, so they do
// not overflow where their squares would; an error beyond float64 (a
// parameter with almost no effect on the data) is reported as not
// determined.
//
// These errors are those of a linearised model: with Gaussian noise and a
// model close to linear over the errors, the true value lies within ±2
// standard errors in about 95 % of fits and the mean reported error equals
// the spread of the estimates; TestCoverage checks both over 1000 seeded
// repetitions (Numerical Recipes §15.6).
//
// # Adding a parameter kind
//
// A kind is one entry of the table in params.go: the collection and field
// (protobuf and JSON names), and a reference to the number in a Crystal.
// A kind on which D depends linearly uses the unit-parameter model. The
// Born charges, on which D depends quadratically, are marked charge and
// use the charge models of charges.go; another non-linear kind (a mass)
// would need its own derivative of D and of the long-wave forms. The
// data kinds, the method and the uncertainties are untouched.
//
// # Cost, concurrency and cancellation
//
// Cost estimates a fit's memory and work from its Shape before any work.
// A fit's wavevectors and grid points are spread over all cores
// (physics/internal/parallel: a worker's panic reaches the caller, sums
// merge in a fixed order, so results do not depend on scheduling); ctx is
// polled between evaluations and inside them, and Fit returns ctx.Err()
// when it ends first. Problem.Progress is called after every evaluation
// with the iteration and χ².
package fit
