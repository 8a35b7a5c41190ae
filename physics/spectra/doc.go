// Package spectra computes phonon densities of states from the modes of a
// grid (physics.GridModes): the linear tetrahedron method (summing the
// tetrahedra of symmetry-equivalent corners once, by the grid's reduction),
// Gaussian broadening and histograms, with per-site and per-label
// projections; and the cost estimate of that computation (DOSCost), for
// admission control, in the conventions of physics.Cost.
//
// It imports the core (physics), physics/mesh and physics/internal/parallel
// only; physics/thermo builds on it (its DOS-integral route). Stats and
// GammaAcoustic are the scan of grid frequencies both packages share.
//
// # Units and conventions
//
// Frequencies in the unit of DOSOptions.Unit (physics.Unit: THz, meV,
// cm⁻¹, rad/s); grid modes are in THz (physics.GridModes.FreqTHz) and are
// scaled once. g(ν) is in states per cell per frequency unit. Bad options
// give a *physics.ValidationError naming every field at once.
//
// # Method
//
// ComputeDOS turns the modes of a grid (physics.Model.GridModes; they record the
// hash of the model that made them, and ComputeDOS and ComputeThermal
// refuse the modes of another model) into a phonon
// density of states g(ν) in states per cell per frequency unit (THz, meV,
// cm⁻¹ or rad/s: DOSOptions.Unit), normalised to p × sites states per
// cell. Three methods:
//
//   - Tetrahedron (the default): the linear tetrahedron method (Blöchl,
//     Jepsen & Andersen, Phys. Rev. B 49, 16223 (1994)). Every grid cell is
//     cut into six tetrahedra around its shortest main diagonal (in
//     Cartesian reciprocal space, Model.Reciprocal), each branch (modes in
//     ascending order) is interpolated linearly inside every tetrahedron
//     and its states are counted exactly. 2D grids use two triangles per
//     cell along the shorter diagonal, 1D grids linear segments. It needs
//     the full grid in grid order.
//   - Gaussian: every mode broadened into a normalised Gaussian of
//     standard deviation Width; the default is ν_top/(c_d·n), ν_top the
//     highest mode, n = N^(1/d) the grid points per direction and c_d = 1,
//     2, 8 in one, two, three dimensions (chosen by measuring the error
//     against converged spectra). Tetrahedra need far fewer q-points for
//     the same accuracy: to come within 1 % (L1), 128 against 4096 for a
//     chain, 32³–48³ against 96³ for the 3D examples.
//   - Histogram: modes counted per bin; for a finite crystal
//     (GridSpec.Finite) this is its exact discrete spectrum.
//
// The samples are Freq[i] = Min + i·Step. DOS[i] is the average of g over
// the bin [Freq[i] − Step/2, Freq[i] + Step/2), taken from the exact state
// count at the bin edges, so Σ DOS·Step is the number of states in the
// window — p × sites to rounding for tetrahedra when the window holds the
// spectrum — and a 1D van Hove divergence stays finite. Integrated[i] is the
// number of states per cell below Freq[i] (including any below the
// window). With Min = Max = 0 the window runs from 0 to 5 % above the
// highest mode (plus five widths for Gaussian); Step defaults to the window
// over DefaultDOSBins (500). A Gaussian's tail below the window is cut off.
//
// Projections (PerSite) weight each mode by its site shares Σ_α |e_sα|²
// (GridOptions.Projections), with tetrahedra through the corner
// integration weights of the same paper, so the shares are interpolated
// like the frequencies. Per-site and per-label (first-appearance order)
// projections sum to the total at every sample; each site's integrates to
// p.
//
// A frequency is imaginary when it is negative (see Zero and imaginary
// modes), except that the p acoustic modes at Γ are never counted
// imaginary (as in Model.Stability); the thermal sums treat |ν| ≤
// ZeroModeTol (1e-6) times the largest |ν| on the grid as a zero mode. ComputeDOS counts imaginary modes and by default leaves
// them out: the Gaussian and histogram skip them, the tetrahedron DOS drops
// the interpolated spectrum below zero (simplices straddling zero keep
// their positive part). NegativeAxis keeps them on the negative
// frequency axis, with the window extended below the lowest mode.
//
// # Invariants
//
// Σ DOS·Step over a window holding the spectrum is p × sites states per
// cell (to rounding for tetrahedra); projections sum to the total at every
// sample; results are bit-for-bit independent of scheduling and core
// count (accumulators per fixed slice, merged in slice order:
// physics/internal/parallel.Slices).
package spectra
