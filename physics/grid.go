// Regular q-point sets (Monkhorst–Pack grids, finite crystals) and the
// modes on every point of one, in parallel.

package physics

import (
	"context"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics/internal/parallel"
)

// QPoint is a wavevector (fractional reciprocal coordinates) with its weight
// in its set.
type QPoint struct {
	Q      [3]float64
	Weight float64
}

// GridSpec is a regular q-point grid: a Monkhorst–Pack grid (Monkhorst &
// Pack, Phys. Rev. B 13, 5188 (1976)), Γ-centred or shifted by half a step,
// or the allowed wavevectors of a finite crystal of Mesh cells under
// periodic boundary conditions. Components of Mesh past the dimensionality
// must be 1 (0 is read as 1).
type GridSpec struct {
	Mesh    [3]int
	Shifted bool // half-step shift (Monkhorst–Pack only), along the d lattice directions
	Finite  bool // finite crystal of Mesh cells: q = n/N, n in (−N/2, N/2]

	dim int // dimensionality, set by normalize (0: treat as 3)
}

// Offset is the grid shift s along k: q_k = (n_k + s)/N_k. It is ½ for a
// shifted grid along the crystal's d directions and 0 elsewhere, so
// unused components stay 0.
func (g GridSpec) Offset(k int) float64 {
	d := g.dim
	if d == 0 {
		d = 3
	}
	if g.Shifted && k < d {
		return 0.5
	}
	return 0
}

// MaxGridPoints bounds any grid the engine will build.
const MaxGridPoints = 1 << 27

// normalize resolves zero components to 1 and checks the spec against the
// model's dimensionality, returning violations with field paths under
// prefix.
func (g GridSpec) normalize(dim int, prefix string) (GridSpec, error) {
	var vs violations
	g.dim = dim
	for k := 0; k < 3; k++ {
		if g.Mesh[k] == 0 && k >= dim {
			g.Mesh[k] = 1
		}
		if k < dim && g.Mesh[k] < 1 {
			vs.add(fmt.Sprintf("%s[%d]", prefix, k), "must be ≥ 1, got %d", g.Mesh[k])
		}
		if k >= dim && g.Mesh[k] != 1 {
			vs.add(fmt.Sprintf("%s[%d]", prefix, k), "must be 1 for a %d-dimensional crystal, got %d", dim, g.Mesh[k])
		}
	}
	if g.Finite && g.Shifted {
		vs.add(prefix, "a finite crystal has no shifted grid")
	}
	if len(vs.list) == 0 {
		// Multiply step by step so that huge meshes cannot overflow.
		n := 1
		for _, x := range g.Mesh {
			if n > MaxGridPoints/x {
				vs.add(prefix, "%d×%d×%d points is more than the engine limit of %d", g.Mesh[0], g.Mesh[1], g.Mesh[2], MaxGridPoints)
				break
			}
			n *= x
		}
	}
	return g, vs.err()
}

// Count is the number of points of the grid.
func (g GridSpec) Count() int {
	n := 1
	for _, x := range g.Mesh {
		if x > 0 {
			n *= x
		}
	}
	return n
}

// Points lists the grid's points in grid order: index (n0·N1 + n1)·N2 + n2,
// nk = 0…Nk−1, q_k = (nk + s)/Nk with s = ½ when shifted, wrapped into
// (−½, ½]. Every point has weight 1/N. For a finite crystal these are
// exactly its allowed wavevectors, each once (common practice).
func (g GridSpec) Points() []QPoint {
	pts, _ := g.points(context.Background())
	return pts
}

// points is Points polling ctx per row of the grid (a list of 4 million
// points takes 0.2–0.3 s); it returns ctx.Err() if ctx ends first.
func (g GridSpec) points(ctx context.Context) ([]QPoint, error) {
	n := g.Count()
	pts := make([]QPoint, 0, n)
	s0, s1, s2 := g.Offset(0), g.Offset(1), g.Offset(2)
	w := 1 / float64(n)
	for a := 0; a < g.Mesh[0]; a++ {
		for b := 0; b < g.Mesh[1]; b++ {
			if err := ctx.Err(); err != nil {
				return nil, err
			}
			for c := 0; c < g.Mesh[2]; c++ {
				pts = append(pts, QPoint{Q: [3]float64{
					wrapHalf((float64(a) + s0) / float64(g.Mesh[0])),
					wrapHalf((float64(b) + s1) / float64(g.Mesh[1])),
					wrapHalf((float64(c) + s2) / float64(g.Mesh[2])),
				}, Weight: w})
			}
		}
	}
	return pts, nil
}

// Point returns point i of Points without building the list, for grids
// too large to hold (a 1 cm crystal of 1 nm cells has 10⁷ points).
// Components of Mesh that are 0 count as 1.
func (g GridSpec) Point(i int) QPoint {
	var n [3]int
	for k := range n {
		n[k] = max(1, g.Mesh[k])
	}
	c := i % n[2]
	b := (i / n[2]) % n[1]
	a := i / (n[1] * n[2])
	return QPoint{Q: [3]float64{
		wrapHalf((float64(a) + g.Offset(0)) / float64(n[0])),
		wrapHalf((float64(b) + g.Offset(1)) / float64(n[1])),
		wrapHalf((float64(c) + g.Offset(2)) / float64(n[2])),
	}, Weight: 1 / float64(g.Count())}
}

// Normalize checks the spec against a d-dimensional crystal (components of
// Mesh past d must be 1, 0 read as 1) and returns it ready for Points,
// with violations under the field "mesh".
func (g GridSpec) Normalize(dim int) (GridSpec, error) { return g.normalize(dim, "mesh") }

// wrapHalf maps x into (−½, ½].
func wrapHalf(x float64) float64 {
	x -= math.Ceil(x - 0.5)
	if x == -0.5 {
		x = 0.5
	}
	return x
}

// GridModes holds the modes on every point of a grid, in grid order.
type GridModes struct {
	// ModelHash is Model.Hash of the model that made these modes:
	// ComputeDOS and ComputeThermal refuse modes of another model, even one
	// of the same size.
	ModelHash string
	Spec      GridSpec
	Points    []QPoint
	NModes    int // modes per point (sites × p)
	NSites    int
	P         int
	// FreqTHz[i*NModes+k] is mode k at point i, ascending, THz; imaginary
	// modes negative, zero modes exactly 0 (doc.go, Zero and imaginary
	// modes).
	FreqTHz []float64
	// SiteWeight[(i*NModes+k)*NSites+s] is Σ_α |e_{sα}|² of mode k at point
	// i: the share of site s in the mode (sums to 1 over sites). Nil unless
	// projections were asked for.
	SiteWeight []float64
	// Eigvecs holds, when asked, the eigenvectors of every point:
	// Eigvecs[(i*NModes+k)*NModes+c]. Nil unless asked.
	Eigvecs []complex128
	// SiteTensor holds, when asked, Re(e_{sα} e*_{sβ}) of mode k at point i
	// for each site s and α ≤ β < P (pairs in the order (0,0), (0,1), …,
	// (0,P−1), (1,1), …): SiteTensor[((i*NModes+k)*NSites+s)*P(P+1)/2 +
	// pair] — the per-site displacement tensors that mean-square
	// displacements need, in memory that grows with sites, not sites².
	SiteTensor []float64
	// Diagonalized is the number of points actually diagonalised (the
	// irreducible points unless GridOptions.NoSymmetry).
	Diagonalized int

	irr   *IrreducibleGrid // the reduction used (nil: every point diagonalised)
	cache *ReductionCache  // where simplex classes of this grid are kept (nil: nowhere)
}

// Bytes is the memory the grid modes hold, for cache accounting: the
// arrays and points (the reduction tables they share are counted once, in
// the caller's ReductionCache).
func (g *GridModes) Bytes() int64 {
	return int64(256 + 8*len(g.FreqTHz) + 8*len(g.SiteWeight) + 8*len(g.SiteTensor) + 16*len(g.Eigvecs) + 32*len(g.Points))
}

// GridOptions selects what GridModes keeps beyond frequencies.
type GridOptions struct {
	Projections  bool // per-site weights
	Eigenvectors bool // full eigenvectors (memory: N·n² complex numbers)
	SiteTensors  bool // per-site displacement tensors (GridModes.SiteTensor)
	// Cache, when not nil, keeps grid reductions and simplex classes for
	// reuse by later calls (see ReductionCache); nil reduces afresh.
	Cache *ReductionCache
	// NoSymmetry diagonalises every grid point instead of the irreducible
	// ones: the reference path (results agree to rounding), and the faster
	// one for crystals whose only symmetry is time reversal and grids so
	// small that reducing them costs more than it saves.
	NoSymmetry bool
}

// GridModes computes the modes on every point of the grid. By default only
// the irreducible points under the model's symmetry and time reversal are
// diagonalised (see ReduceGrid) and the rest are unfolded from them:
// frequencies copied, site weights and site tensors permuted and rotated,
// eigenvectors rotated with their phases. Within each degenerate group of
// modes (frequencies equal to DegenerateTolTHz) the site weights and site
// tensors are replaced by their group average, which — unlike the
// per-mode values — does not depend on the arbitrary basis a solver picks
// inside a degenerate subspace; with that, the reduced and the full
// computation (GridOptions.NoSymmetry) agree to rounding. Work is spread
// over all cores with one reusable workspace per core (no allocation per
// point) and stops promptly when ctx is done, returning ctx.Err().
func (m *Model) GridModes(ctx context.Context, spec GridSpec, opt GridOptions) (*GridModes, error) {
	spec, err := spec.normalize(m.dim, "mesh")
	if err != nil {
		return nil, err
	}
	pts, err := spec.points(ctx)
	if err != nil {
		return nil, err
	}
	var ir *IrreducibleGrid
	reps := len(pts)
	if !opt.NoSymmetry {
		if ir, err = m.ReduceGrid(ctx, spec, opt.Cache); err != nil {
			return nil, err
		}
		reps = len(ir.Irr)
	}
	repQ := func(s int) [3]float64 {
		if ir == nil {
			return pts[s].Q
		}
		return pts[ir.Irr[s]].Q
	}
	nm, ns := m.Modes(), m.nsites
	p := m.p
	pairs := p * (p + 1) / 2
	c := &GridModes{ModelHash: m.hash, Spec: spec, Points: pts, NModes: nm, NSites: ns, P: p,
		FreqTHz: make([]float64, reps*nm), Diagonalized: reps}
	vec := opt.Projections || opt.Eigenvectors || opt.SiteTensors
	if opt.Projections {
		c.SiteWeight = make([]float64, reps*nm*ns)
	}
	if opt.Eigenvectors {
		c.Eigvecs = make([]complex128, reps*nm*nm)
	}
	if opt.SiteTensors {
		c.SiteTensor = make([]float64, reps*nm*ns*pairs)
	}
	err = parallelWork(ctx, reps, func(done <-chan struct{}) func(i int) bool {
		w := m.newPointWork(done)
		return func(i int) bool {
			if !w.solve(repQ(i), vec) {
				return false
			}
			f := c.FreqTHz[i*nm : (i+1)*nm]
			w.freqs(f)
			if opt.Eigenvectors {
				copy(c.Eigvecs[i*nm*nm:(i+1)*nm*nm], w.eig.Vectors())
			}
			if opt.Projections {
				sw := c.SiteWeight[i*nm*ns : (i+1)*nm*ns]
				for k := 0; k < nm; k++ {
					e := w.eig.Vectors()[k*nm : (k+1)*nm]
					for c, z := range e {
						sw[k*ns+c/m.p] += real(z)*real(z) + imag(z)*imag(z)
					}
				}
				averageDegenerate(f, sw, ns)
			}
			if opt.SiteTensors {
				st := c.SiteTensor[i*nm*ns*pairs : (i+1)*nm*ns*pairs]
				for k := 0; k < nm; k++ {
					for s := 0; s < ns; s++ {
						e := w.eig.Vectors()[k*nm+s*p : k*nm+(s+1)*p]
						t := st[(k*ns+s)*pairs : (k*ns+s+1)*pairs]
						x := 0
						for a := 0; a < p; a++ {
							for b := a; b < p; b++ {
								t[x] = real(e[a])*real(e[b]) + imag(e[a])*imag(e[b])
								x++
							}
						}
					}
				}
				averageDegenerate(f, st, ns*pairs)
			}
			return true
		}
	})
	if err != nil {
		return nil, err
	}
	if ir == nil {
		return c, nil
	}
	return m.unfold(ctx, ir, c, opt)
}

// DegenerateTolTHz is the frequency difference (THz, relative to the
// largest |ν| at the point, with an absolute floor of 1e-9 THz) within which
// modes at one q-point are treated as one degenerate group.
const DegenerateTolTHz = 1e-7

// averageDegenerate replaces the per-mode values vals[k*stride : (k+1)*stride]
// of every group of degenerate modes (freq ascending) by the group average.
func averageDegenerate(freq, vals []float64, stride int) {
	var top float64
	for _, f := range freq {
		top = max(top, math.Abs(f))
	}
	tol := DegenerateTolTHz*top + 1e-9
	for k := 0; k < len(freq); {
		e := k + 1
		for e < len(freq) && freq[e]-freq[e-1] <= tol {
			e++
		}
		if n := e - k; n > 1 {
			for x := 0; x < stride; x++ {
				var sum float64
				for j := k; j < e; j++ {
					sum += vals[j*stride+x]
				}
				for j := k; j < e; j++ {
					vals[j*stride+x] = sum / float64(n)
				}
			}
		}
		k = e
	}
}

// parallelWork runs a per-point function over [0, n) on all cores. Each
// worker builds its own function (and workspace) with newWorker; the
// function returns false when it saw done closed. Points are handed out in
// small blocks and ctx is polled before every point, so cancellation stops
// the work within one point (and within a fraction of one for large
// matrices, whose solver polls done itself). It returns ctx.Err() if ctx
// ended first; a worker's panic is re-raised here (parallel.For).
func parallelWork(ctx context.Context, n int, newWorker func(done <-chan struct{}) func(i int) bool) error {
	return parallel.For(ctx, n, 16, newWorker)
}

// parallelRange runs fn over [0, n) in chunks on all cores, checking ctx
// between chunks; it returns ctx.Err() if ctx ended first; a worker's
// panic is re-raised here (parallel.Chunks).
func parallelRange(ctx context.Context, n int, fn func(lo, hi int)) error {
	return parallel.Chunks(ctx, n, 64, fn)
}
