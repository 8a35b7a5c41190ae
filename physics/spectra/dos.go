package spectra

import (
	"context"
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/blas/blas64"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/parallel"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// DOSMethod selects how ComputeDOS turns grid modes into a density of
// states.
type DOSMethod int

// DOS methods. Tetrahedron is the zero value.
const (
	// Tetrahedron is the linear tetrahedron method in 3D (Blöchl, Jepsen &
	// Andersen, Phys. Rev. B 49, 16223 (1994)), its triangle analogue in 2D
	// and linear segments in 1D: frequencies are interpolated linearly
	// inside every simplex of the grid and the states counted exactly.
	Tetrahedron DOSMethod = iota
	// Gaussian broadens every mode into a normalised Gaussian of standard
	// deviation Width.
	Gaussian
	// Histogram counts modes per bin of width Step; for a finite crystal
	// this is its exact discrete spectrum.
	Histogram
)

func (m DOSMethod) String() string {
	switch m {
	case Tetrahedron:
		return "tetrahedron"
	case Gaussian:
		return "gaussian"
	case Histogram:
		return "histogram"
	}
	return fmt.Sprintf("DOSMethod(%d)", int(m))
}

// DOSOptions configures ComputeDOS. The zero value asks for the
// tetrahedron DOS in THz on a window chosen from the modes.
type DOSOptions struct {
	Method DOSMethod
	Unit   physics.Unit // unit of Min, Max, Step, Width and of the result
	// Min and Max bound the window of sample frequencies; both 0 means a
	// window chosen from the modes: from 0 (or below the lowest imaginary
	// mode with NegativeAxis) to 5 % above the highest mode, plus 5 widths
	// for Gaussian.
	Min, Max float64
	// Step is the spacing of the samples and the width of the bin each one
	// stands for; 0 means the window divided into DefaultDOSBins.
	Step float64
	// Width is the Gaussian standard deviation; 0 means the default
	// ν_top / (c_d·n), with ν_top the highest mode, n = N^(1/d) the grid's
	// points per direction and c_d = 1, 2, 8 in 1, 2, 3 dimensions (see
	// defaultGaussianWidth). Only the Gaussian method takes a width.
	Width float64
	// PerSite also returns the DOS projected on every site and label
	// (the GridModes must carry SiteWeight).
	PerSite bool
	// NegativeAxis keeps imaginary modes, as negative frequencies, instead
	// of leaving them out.
	NegativeAxis bool
}

// DOSResult is a density of states sampled on a frequency window.
//
// Freq[i] = Min + i·Step; DOS[i] is the average of g(ν) over the bin
// [Freq[i] − Step/2, Freq[i] + Step/2), in states per cell per Unit, so
// Σ DOS[i]·Step is the number of states in the window; Integrated[i] is the
// number of states per cell below Freq[i]. Sites[s] and LabelDOS[l] are
// projections in the same units, summing to DOS at every sample.
type DOSResult struct {
	Unit       physics.Unit
	Freq       []float64
	DOS        []float64
	Integrated []float64
	Sites      [][]float64 // per site, in site order (PerSite only)
	Labels     []string    // distinct site labels in first-appearance order (PerSite only)
	LabelDOS   [][]float64 // per label, parallel to Labels (PerSite only)
	// Imaginary is the number of imaginary modes on the grid (q-point ×
	// branch, negative frequency, not counting the acoustic modes at Γ),
	// whether or not they are shown.
	Imaginary int
	// StatesPerCell is p × sites, the integral of g over all frequencies.
	StatesPerCell float64
	// Width is the Gaussian standard deviation used (Unit), 0 for the other
	// methods.
	Width float64
}

// DOS limits and defaults.
const (
	DefaultDOSBins = 500       // samples across a default window
	MaxDOSSamples  = 1_000_000 // largest number of samples ComputeDOS returns
	// ZeroModeTol is the tolerance, relative to the largest |ν| on the grid,
	// within which a positive frequency counts as a zero mode for the
	// thermal sums (which leave zero modes out). Rounding noise itself is
	// already exactly 0 (doc.go, Zero and imaginary modes; it was about
	// 1e-8 of the highest mode before). It is relative so that the real low
	// modes of fine grids (ν_max·π/N on a chain of N points) are never
	// taken for zero.
	ZeroModeTol = 1e-6
	// MaxDOSFrequency bounds |Min|, |Max|, Step and Width in any unit:
	// above every plausible mode (1000 THz is 6.3e15 rad/s), and low
	// enough that window arithmetic (Max − Min, margins of five widths)
	// cannot overflow.
	MaxDOSFrequency = 1e18
	// MinDOSWidth is the narrowest Gaussian accepted (in the DOS unit):
	// below it 1/Width could overflow and a mode on a bin edge would give
	// 0·∞; far below any meaningful broadening in every unit.
	MinDOSWidth = 1e-12
	// gaussianCutoff is how many standard deviations a Gaussian is
	// evaluated over on each side (the tail beyond is 6e-16 of its area).
	gaussianCutoff = 8
)

// ComputeDOS returns the density of states of the modes g of model m.
//
// Bad options give a *ValidationError naming the fields ("method", "unit",
// "min", "max", "step", "width"), every violation at once. g must come from
// m; the tetrahedron method needs the full regular grid (in grid order),
// PerSite needs g.SiteWeight.
func ComputeDOS(ctx context.Context, m *physics.Model, g *physics.GridModes, opt DOSOptions) (*DOSResult, error) {
	if err := checkDOSInput(m, g, opt); err != nil {
		return nil, err
	}
	scale := opt.Unit.PerTHz()
	st := Stats(g)
	res := &DOSResult{Unit: opt.Unit, Imaginary: st.Imaginary, StatesPerCell: float64(g.NModes)}
	w, err := dosWindowOf(m, g, opt, st, scale)
	if err != nil {
		return nil, err
	}
	res.Width = w.width
	grid := newAnchoredCumGrid(w.lo, w.step/2, 1, 2*w.n+1)
	acc, err := accumulateDOS(ctx, m, g, opt, scale, w.width, grid)
	if err != nil {
		return nil, err
	}
	tot, site := acc.totals()
	res.fillTotal(tot, w)
	if opt.PerSite {
		res.fillProjections(m.Labels(), site, g.NSites, w)
	}
	return res, nil
}

// checkDOSInput checks the grid against the model, the options, and what
// PerSite and the tetrahedron method need of the grid.
func checkDOSInput(m *physics.Model, g *physics.GridModes, opt DOSOptions) error {
	if err := physics.CheckGridModes(m, g); err != nil {
		return err
	}
	if err := opt.validate(); err != nil {
		return err
	}
	if opt.PerSite && len(g.SiteWeight) != len(g.FreqTHz)*g.NSites {
		return errors.New("physics: per-site DOS needs grid modes with site weights (GridOptions.Projections)")
	}
	if opt.Method == Tetrahedron && len(g.Points) != g.Spec.Count() {
		return fmt.Errorf("physics: the tetrahedron method needs the full %d-point grid, got %d points", g.Spec.Count(), len(g.Points))
	}
	return nil
}

// dosWindow is the sampling of one DOS: n samples lo + i·step (opt.Unit)
// and the Gaussian width (0 for the other methods).
type dosWindow struct {
	lo, step, width float64
	n               int
}

// dosWindowOf resolves the window, step and width of opt against the
// modes' statistics st (scale: opt.Unit per THz), refusing more than
// MaxDOSSamples samples.
func dosWindowOf(m *physics.Model, g *physics.GridModes, opt DOSOptions, st Spectrum, scale float64) (dosWindow, error) {
	top, low := st.MaxTHz*scale, st.MinTHz*scale
	ref := math.Max(top, -low)
	if !(ref > 0) {
		ref = scale // no non-zero mode at all: a window of 1 THz
		top = math.Max(top, 0)
	}
	width := 0.0
	if opt.Method == Gaussian {
		width = opt.Width
		if width == 0 {
			width = defaultGaussianWidth(ref, g.Spec.Mesh, m.Dim())
		}
	}
	lo, hi, step := opt.Min, opt.Max, opt.Step
	if lo == 0 && hi == 0 {
		margin := 0.05*ref + 5*width
		hi = math.Max(top, 0) + margin
		if opt.NegativeAxis && st.Imaginary > 0 {
			lo = low - margin
		}
	}
	if step == 0 {
		step = (hi - lo) / DefaultDOSBins
	}
	nf := dosSamples(lo, hi, step)
	if !(nf <= MaxDOSSamples) {
		return dosWindow{}, &physics.ValidationError{Violations: []physics.Violation{{Field: "step", Description: fmt.Sprintf(
			"the window [%g, %g] at step %g gives %.3g samples, more than the limit of %d", lo, hi, step, nf, MaxDOSSamples)}}}
	}
	return dosWindow{lo: lo, step: step, width: width, n: int(nf)}, nil
}

// accumulateDOS counts the states of g below every edge and centre of
// grid by opt.Method: tetrahedra (by symmetry class for the total alone,
// every simplex for projections), or Gaussians or bins per mode.
// Negative frequencies are imaginary modes: left out unless
// opt.NegativeAxis.
func accumulateDOS(ctx context.Context, m *physics.Model, g *physics.GridModes, opt DOSOptions, scale, width float64, grid cumGrid) (*cumAcc, error) {
	hasCut, cut := !opt.NegativeAxis, 0.0
	if opt.Method != Tetrahedron {
		return modeAccumulate(ctx, g, opt.Method, scale, width, grid, opt.PerSite, hasCut, cut)
	}
	// The simplex counts are ratios of products of frequency differences.
	// Scaled by a power of two (exact in binary floating point), the
	// frequencies, the abscissae and the cut give the same counts to the
	// bit, with the abscissae's spacing near 1: a product of three
	// differences of modes near 1e-120 THz no longer underflows to 0 (0/0,
	// or 1/0 times a count).
	pow2 := math.Ldexp(1, -math.Ilogb(grid.dx))
	scale, grid, cut = scale*pow2, grid.scaled(pow2), cut*pow2
	set := mesh.GridSimplices(m.Reciprocal(), g.Spec.Mesh, m.Dim())
	if opt.PerSite {
		// Projections need every simplex (their weights differ between
		// equivalent points): classes only for the total.
		return tetraAccumulate(ctx, g, set, scale, grid, opt.PerSite, hasCut, cut)
	}
	classes, err := mesh.SimplexClasses(ctx, g.Reduction(), set, g.ReductionCache())
	if err != nil {
		return nil, err
	}
	if classes != nil {
		return tetraAccumulateClasses(ctx, g, classes, set, scale, grid, hasCut, cut)
	}
	return tetraAccumulate(ctx, g, set, scale, grid, opt.PerSite, hasCut, cut)
}

// fillTotal sets Freq, DOS and Integrated from the cumulative totals tot
// (states below every bin edge and centre, edges at even indices).
func (res *DOSResult) fillTotal(tot []float64, w dosWindow) {
	n, lo, step := w.n, w.lo, w.step
	res.Freq = make([]float64, n)
	res.DOS = make([]float64, n)
	res.Integrated = make([]float64, n)
	for i := 0; i < n; i++ {
		res.Freq[i] = lo + float64(i)*step
		res.DOS[i] = (tot[2*i+2] - tot[2*i]) / step
		res.Integrated[i] = tot[2*i+1]
	}
}

// fillProjections sets Sites from the cumulative per-site counts site
// (ns sites per edge or centre), replaces DOS by the sum of the sites so
// that the two agree at every sample to rounding, and sums the sites by
// label (labels: the model's, per site) into Labels and LabelDOS.
func (res *DOSResult) fillProjections(labels []string, site []float64, ns int, w dosWindow) {
	n, step := w.n, w.step
	res.Sites = make([][]float64, ns)
	for s := range res.Sites {
		d := make([]float64, n)
		for i := range d {
			d[i] = (site[(2*i+2)*ns+s] - site[2*i*ns+s]) / step
		}
		res.Sites[s] = d
	}
	for i := range res.DOS {
		sum := 0.0
		for s := 0; s < ns; s++ {
			sum += res.Sites[s][i]
		}
		res.DOS[i] = sum
	}
	index := map[string]int{}
	for s, l := range labels {
		li, ok := index[l]
		if !ok {
			li = len(res.Labels)
			index[l] = li
			res.Labels = append(res.Labels, l)
			res.LabelDOS = append(res.LabelDOS, make([]float64, n))
		}
		for i, x := range res.Sites[s] {
			res.LabelDOS[li][i] += x
		}
	}
}

// Samples is the number of frequency samples ComputeDOS returns for these
// options, when the options alone fix it: DefaultDOSBins+1 for the default
// step, the window over the step for a given window and step. known is
// false for a given step across the window chosen from the modes. The count
// is a float64: a tiny step gives more samples than an int holds.
func (o DOSOptions) Samples() (n float64, known bool) {
	switch {
	case o.Step == 0:
		return DefaultDOSBins + 1, true
	case o.Min == 0 && o.Max == 0:
		return 0, false
	}
	return dosSamples(o.Min, o.Max, o.Step), true
}

// dosSamples is the number of samples lo, lo+step, … up to hi, hi included
// when on the step (within 1e-9 of a step). Counted in floating point: a
// tiny step must not overflow an int.
func dosSamples(lo, hi, step float64) float64 {
	return math.Floor((hi-lo)/step+1e-9) + 1
}

// Validate checks the options alone and returns a *ValidationError listing
// every violation with field paths relative to DOSOptions ("method",
// "unit", "min", "max", "step", "width"), or nil. ComputeDOS runs it; a
// caller checks a request with it before any work. A width with a method
// other than Gaussian is a violation, not ignored.
func (o DOSOptions) Validate() error { return o.validate() }

// validate checks the options alone, listing every violation.
func (o DOSOptions) validate() error {
	var vs physics.Violations
	if o.Method < Tetrahedron || o.Method > Histogram {
		vs.Add("method", "unknown method %d", int(o.Method))
	}
	if o.Unit < physics.THz || o.Unit > physics.RadPerS {
		vs.Add("unit", "unknown unit %d", int(o.Unit))
	}
	for _, f := range []struct {
		name string
		v    float64
	}{{"min", o.Min}, {"max", o.Max}, {"step", o.Step}, {"width", o.Width}} {
		if !(math.Abs(f.v) <= MaxDOSFrequency) {
			vs.Add(f.name, "must be a finite number within ±%g (in the DOS unit), got %v", MaxDOSFrequency, f.v)
		}
	}
	if o.Width > 0 && o.Width < MinDOSWidth {
		vs.Add("width", "must be ≥ %g (in the DOS unit; 0 for the default), got %v", MinDOSWidth, o.Width)
	}
	if !math.IsInf(o.Min, 0) && !math.IsNaN(o.Min) && !math.IsInf(o.Max, 0) && !math.IsNaN(o.Max) && !(o.Min == 0 && o.Max == 0) && !(o.Max > o.Min) {
		vs.Add("max", "must be greater than min (%g), got %g (leave both 0 for a window from the modes)", o.Min, o.Max)
	}
	if o.Step < 0 {
		vs.Add("step", "must be > 0 (0 for the default), got %g", o.Step)
	}
	if o.Width < 0 {
		vs.Add("width", "must be > 0 (0 for the default), got %g", o.Width)
	} else if o.Width != 0 && o.Method != Gaussian && o.Method >= Tetrahedron && o.Method <= Histogram {
		vs.Add("width", "only the gaussian method takes a width, got %g with %v", o.Width, o.Method)
	}
	return vs.Err()
}

// Spectrum holds the extremes of the grid frequencies (THz), the
// tolerance derived from them and the number of imaginary modes: what the
// DOS and the thermal sums (package thermo) both need of grid modes.
type Spectrum struct {
	MinTHz, MaxTHz, AbsMaxTHz float64
	ZeroTol                   float64 // |ν| up to this is a zero mode: ZeroModeTol·AbsMaxTHz
	Imaginary                 int     // imaginary modes, Γ's acoustic modes never counted
}

// Stats scans the frequencies of g. A mode is imaginary when its
// frequency is negative (rounding noise was set to 0 when the modes were
// computed: doc.go, Zero and imaginary modes), except that at Γ the p modes of smallest |ν| (the acoustic
// modes, zero only to rounding, or not at all for explicit blocks without
// the sum rule) are never counted imaginary, as in Model.Stability.
func Stats(g *physics.GridModes) Spectrum {
	st := Spectrum{MinTHz: math.Inf(1), MaxTHz: math.Inf(-1)}
	for _, f := range g.FreqTHz { // plain comparisons: the min/max builtins' NaN handling is 8× slower here
		if f < st.MinTHz {
			st.MinTHz = f
		}
		if f > st.MaxTHz {
			st.MaxTHz = f
		}
	}
	st.AbsMaxTHz = math.Max(st.MaxTHz, -st.MinTHz)
	st.ZeroTol = ZeroModeTol * st.AbsMaxTHz
	if st.MinTHz >= 0 {
		return st // nothing is imaginary
	}
	nm := g.NModes
	for i, q := range g.Points {
		f := g.FreqTHz[i*nm : (i+1)*nm]
		var skip uint64 // bit k: mode k is one of Γ's acoustic modes
		if physics.IsGamma(q.Q) {
			skip = GammaAcoustic(f, g.P)
		}
		for k, x := range f {
			if x < 0 && skip>>k&1 == 0 {
				st.Imaginary++
			}
		}
	}
	return st
}

// GammaAcoustic returns a bit set of the p modes of f with the smallest
// |ν| (of the first 64 modes; p ≤ 3).
func GammaAcoustic(f []float64, p int) uint64 {
	var set uint64
	for n := 0; n < p; n++ {
		best := -1
		for k := 0; k < len(f) && k < 64; k++ {
			if set>>k&1 == 0 && (best < 0 || math.Abs(f[k]) < math.Abs(f[best])) {
				best = k
			}
		}
		if best >= 0 {
			set |= 1 << best
		}
	}
	return set
}

// defaultGaussianWidth is ν_top / (c_d · n), n = N^(1/d) the grid's
// points per direction and c_1, c_2, c_3 = 1, 2, 8. In 1D, ν_top/n is about
// the frequency step between neighbouring grid points, the smallest width
// that hides the grid; in 2D and 3D the frequencies of neighbouring grid
// lines interleave, so finer widths do. The factors come from the
// convergence study of TestDOSConvergenceTable (dos_convergence_test.go):
// the width of least L1 error in 1D and 2D, and in 3D a compromise between
// the fcc and rock-salt-like examples, whose best widths differ by a factor
// 3 to 6: at 48³ its error is within a factor 2.1 of the best for both.
func defaultGaussianWidth(top float64, mesh [3]int, dim int) float64 {
	dim = min(max(dim, 1), 3)
	n := 1.0
	for k := 0; k < dim; k++ {
		n *= float64(max(mesh[k], 1))
	}
	return top / (math.Pow(n, 1/float64(dim)) * [4]float64{0, 1, 2, 8}[dim])
}

// modeAccumulate accumulates the Gaussian or histogram state counts of
// every mode of g (frequencies times scale), all cores, one accumulator per
// worker. Modes below the cut (imaginary ones, when excluded) are left out.
//
// The points of one orbit of g's symmetry reduction have the same
// frequencies (unfold copies them) and site weights that are permutations
// of one another, so each orbit is placed once: with the sum of its
// points' weights and, per site, the sum of its points' weighted site
// shares. The result is the per-point sum regrouped (equal up to
// rounding); for a crystal with time reversal alone it halves the work.
// A mode's per-site Gaussian is one rank-1 update of the samples it
// reaches (gonum's Ger: the samples' Φ values times the site shares).
func modeAccumulate(ctx context.Context, g *physics.GridModes, method DOSMethod, scale, width float64, grid cumGrid, sites, hasCut bool, cut float64) (*cumAcc, error) {
	nm, ns := g.NModes, g.NSites
	accNS := 0
	if sites {
		accNS = ns
	}
	orb := pointOrbits(g)
	norb := orb.count()
	workers := parallel.SliceCount(norb, modeChunk)
	accs := make([]*cumAcc, workers)
	// Per slice: the orbit's site shares (mode-major) and Φ on the samples
	// a mode reaches.
	shares, phis := make([][]float64, workers), make([][]float64, workers)
	for w := range accs {
		accs[w] = newCumAcc(grid, accNS, false, 0)
		if sites {
			shares[w] = make([]float64, nm*ns)
		}
		if method == Gaussian {
			phis[w] = make([]float64, grid.n)
		}
	}
	reach := gaussianCutoff * width
	invSigma := 1 / width
	err := parallel.Slices(ctx, norb, modeChunk, workers, func(worker, lo, hi int) {
		a, share, phi := accs[worker], shares[worker], phis[worker]
		var one [1]int32
		for o := lo; o < hi; o++ {
			members := orb.members(o, &one)
			first := int(members[0])
			w := 0.0
			for _, i := range members {
				w += g.Points[i].Weight
			}
			if sites {
				clear(share)
				for _, i := range members {
					orbitShares(share, g.SiteWeight[int(i)*nm*ns:(int(i)+1)*nm*ns], ns, g.Points[i].Weight)
				}
			}
			for k := 0; k < nm; k++ {
				nu := g.FreqTHz[first*nm+k] * scale
				if hasCut && nu < cut {
					continue
				}
				var sw []float64
				if sites {
					sw = share[k*ns : (k+1)*ns]
				}
				if method == Histogram {
					j := grid.above(nu)
					a.step[j] += w
					if sites {
						addTo(a.sstep[j*ns:(j+1)*ns], sw)
					}
					continue
				}
				j0, j1 := grid.from(nu-reach), grid.from(nu+reach)
				a.step[j1] += w
				if sites {
					addTo(a.sstep[j1*ns:(j1+1)*ns], sw)
				}
				if j1 <= j0 {
					continue
				}
				p := phi[:j1-j0]
				for j := range p {
					p[j] = normalCDF((grid.at(j0+j) - nu) * invSigma)
					a.val[j0+j] += w * p[j]
				}
				if sites {
					addOuter(a.sval[j0*ns:j1*ns], p, sw)
				}
			}
		}
	})
	if err != nil {
		return nil, err
	}
	for _, b := range accs[1:] {
		accs[0].merge(b)
	}
	return accs[0], nil
}

// orbitShares adds weight × the site shares of every mode of one point to
// dst (both mode-major, ns sites a mode): a mode's share of site s is its
// site weight divided by the sum over its sites (all 0 if that is 0).
func orbitShares(dst, siteWeight []float64, ns int, weight float64) {
	for k := 0; k+ns <= len(siteWeight); k += ns {
		src := siteWeight[k : k+ns]
		sum := 0.0
		for _, x := range src {
			sum += x
		}
		if !(sum > 0) {
			continue
		}
		f := weight / sum
		d := dst[k : k+ns]
		for s, x := range src {
			d[s] += f * x
		}
	}
}

// addTo adds x to dst element by element.
func addTo(dst, x []float64) {
	dst = dst[:len(x)]
	for s, v := range x {
		dst[s] += v
	}
}

// gerMinSites is the number of sites from which a mode's per-site update
// goes through gonum's Ger (assembly on amd64, 3× the plain loop at 64
// sites by BenchmarkAddOuter); below it the call's checks cost more than
// they save.
const gerMinSites = 8

// addOuter adds the outer product p ⊗ x to the row-major len(p)×len(x)
// block dst.
func addOuter(dst, p, x []float64) {
	ns := len(x)
	if ns >= gerMinSites {
		blas64.Ger(1, blas64.Vector{N: len(p), Data: p, Inc: 1}, blas64.Vector{N: ns, Data: x, Inc: 1},
			blas64.General{Rows: len(p), Cols: ns, Stride: ns, Data: dst})
		return
	}
	for j, f := range p {
		row := dst[j*ns : (j+1)*ns]
		for s, v := range x {
			row[s] += v * f
		}
	}
}

// orbits lists the points of grid modes by orbit of their symmetry
// reduction: orbit o is idx[start[o]:start[o+1]], ascending. With no
// reduction every point is its own orbit (start and idx nil).
type orbits struct {
	n          int // points
	start, idx []int32
}

// pointOrbits groups the points of g by the reduction's slot (a counting
// sort of Slot).
func pointOrbits(g *physics.GridModes) orbits {
	ir := g.Reduction()
	if ir == nil || len(ir.Slot) != len(g.Points) || len(ir.Irr) == len(g.Points) {
		return orbits{n: len(g.Points)}
	}
	start := make([]int32, len(ir.Irr)+1)
	for _, s := range ir.Slot {
		start[s+1]++
	}
	for o := range ir.Irr {
		start[o+1] += start[o]
	}
	idx := make([]int32, len(ir.Slot))
	next := append([]int32(nil), start[:len(ir.Irr)]...)
	for i, s := range ir.Slot {
		idx[next[s]] = int32(i)
		next[s]++
	}
	return orbits{n: len(g.Points), start: start, idx: idx}
}

// count is the number of orbits.
func (o orbits) count() int {
	if o.start == nil {
		return o.n
	}
	return len(o.start) - 1
}

// members are the points of orbit k (in one, when the orbit is a point).
func (o orbits) members(k int, one *[1]int32) []int32 {
	if o.start == nil {
		one[0] = int32(k)
		return one[:]
	}
	return o.idx[o.start[k]:o.start[k+1]]
}

// cdfTable holds Φ(u) = ½ erfc(−u/√2) and φ(u) = Φ′(u) at u = −8 + i/cdfPerUnit,
// for cubic Hermite interpolation: error ≤ h⁴/384 · max|φ‴| ≈ 5e-12
// (h = 1/128; common practice, e.g. Burden & Faires, Numerical Analysis,
// §3.4), so the Gaussian DOS costs a table look-up per sample instead of an
// erfc.
var cdfTable = func() (t [2*gaussianCutoff*cdfPerUnit + 1][2]float64) {
	for i := range t {
		u := -gaussianCutoff + float64(i)/cdfPerUnit
		t[i] = [2]float64{0.5 * math.Erfc(-u/math.Sqrt2), math.Exp(-u*u/2) / math.Sqrt(2*math.Pi)}
	}
	return t
}()

const cdfPerUnit = 128

// normalCDF is Φ(u) for |u| ≤ gaussianCutoff (0 below, 1 above), from
// cdfTable.
func normalCDF(u float64) float64 {
	x := (u + gaussianCutoff) * cdfPerUnit
	switch {
	case !(x > 0):
		return 0
	case x >= 2*gaussianCutoff*cdfPerUnit:
		return 1
	}
	i := int(x)
	t := x - float64(i)
	p0, p1 := cdfTable[i], cdfTable[i+1]
	const h = 1.0 / cdfPerUnit
	t2, t3 := t*t, t*t*t
	return (2*t3-3*t2+1)*p0[0] + (t3-2*t2+t)*h*p0[1] + (-2*t3+3*t2)*p1[0] + (t3-t2)*h*p1[1]
}

// modeChunk is how many q-points a worker takes at a time.
const modeChunk = 256
