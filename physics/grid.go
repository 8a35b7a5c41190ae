// Regular q-point sets (Monkhorst–Pack grids, finite crystals) and the
// modes on every point of one, in parallel.

package physics

import (
	"context"
	"errors"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics/mesh"

	"github.com/materials-lab/modegrid/physics/internal/parallel"
)

// GridModes holds the modes on every point of a grid, in grid order.
type GridModes struct {
	// ModelHash is Model.Hash of the model that made these modes:
	// ComputeDOS and ComputeThermal refuse modes of another model, even one
	// of the same size.
	ModelHash string
	Spec      mesh.GridSpec
	Points    []mesh.QPoint
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

	irr   *mesh.IrreducibleGrid // the reduction used (nil: every point diagonalised)
	cache *mesh.ReductionCache  // where simplex classes of this grid are kept (nil: nowhere)
}

// Reduction is the symmetry reduction the modes were computed with (the
// orbits of the grid's points), nil when every point was diagonalised
// (GridOptions.NoSymmetry, a finite crystal, or no operation but the
// identity). The tetrahedron DOS (package spectra) uses it to sum
// equivalent simplices once. Read-only: it is shared with the cache.
func (g *GridModes) Reduction() *mesh.IrreducibleGrid { return g.irr }

// ReductionCache is the cache the reduction came from and where tables
// derived from it (the tetrahedron method's simplex classes) are kept;
// nil keeps nothing.
func (g *GridModes) ReductionCache() *mesh.ReductionCache { return g.cache }

// WithoutCache returns a shallow copy of g (sharing its arrays) that keeps
// derived tables in no cache, so that consumers compute them afresh: for
// measuring a cold computation (the cost estimators' tests).
func (g *GridModes) WithoutCache() *GridModes {
	c := *g
	c.cache = nil
	return &c
}

// CheckGridModes checks that g is a complete set of modes made by m (or by
// a model of the same hash, which has the same physics): the check every
// consumer of grid modes (the DOS, the thermal sums) makes first.
func CheckGridModes(m *Model, g *GridModes) error {
	switch {
	case m == nil:
		return errors.New("physics: nil model")
	case g == nil:
		return errors.New("physics: nil grid modes")
	case g.ModelHash != m.Hash():
		return fmt.Errorf("physics: grid modes were made by model %s, not by this model %s: compute them with this model's GridModes", shortHash(g.ModelHash), shortHash(m.Hash()))
	case g.NModes != m.ModeCount() || g.NSites != m.Sites():
		return fmt.Errorf("physics: grid modes have %d modes of %d sites, the model %d of %d", g.NModes, g.NSites, m.ModeCount(), m.Sites())
	case len(g.Points) == 0 || len(g.FreqTHz) != len(g.Points)*g.NModes:
		return fmt.Errorf("physics: grid modes hold %d frequencies for %d points of %d modes", len(g.FreqTHz), len(g.Points), g.NModes)
	}
	return nil
}

// shortHash is the first 12 characters of a model hash, for messages.
func shortHash(h string) string {
	switch {
	case h == "":
		return "(none recorded)"
	case len(h) > 12:
		return h[:12]
	}
	return h
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
	Cache *mesh.ReductionCache
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
func (m *Model) GridModes(ctx context.Context, spec mesh.GridSpec, opt GridOptions) (*GridModes, error) {
	spec, err := normalizeSpec(spec, m.dim, "mesh")
	if err != nil {
		return nil, err
	}
	pts, err := spec.PointsContext(ctx)
	if err != nil {
		return nil, err
	}
	var ir *mesh.IrreducibleGrid
	var ops []SymOp
	reps := len(pts)
	if !opt.NoSymmetry {
		if ir, ops, err = m.reduceGrid(ctx, spec, opt.Cache); err != nil {
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
	nm, ns, p := m.ModeCount(), m.nsites, m.p
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
	// Batches of consecutive points per worker: one batched assembly each
	// for a model with a stack (dynbatch.go), else 16 points per grab.
	batch := m.batchPoints()
	err = parallel.For(ctx, (reps+batch-1)/batch, 1, func(done <-chan struct{}) func(b int) bool {
		w := m.newPointWork(done)
		w.reserve(reps)
		return func(b int) bool {
			lo, hi := b*batch, min((b+1)*batch, reps)
			if w.batch != nil {
				w.qbuf = w.qbuf[:0]
				for i := lo; i < hi; i++ {
					w.qbuf = append(w.qbuf, repQ(i))
				}
				if !w.prefetch(w.qbuf) {
					return false
				}
			}
			for i := lo; i < hi; i++ {
				if w.stopped() || !w.solve(repQ(i), vec) {
					return false
				}
				c.store(i, w, opt)
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
	return m.unfold(ctx, ir, ops, c, opt)
}

// store writes the modes that w has just solved into row i of c: the
// frequencies, and the eigenvectors, site weights and site tensors that
// opt asks for (the last two averaged over degenerate groups).
func (c *GridModes) store(i int, w *pointWork, opt GridOptions) {
	nm, ns, p := c.NModes, c.NSites, c.P
	pairs := p * (p + 1) / 2
	f := c.FreqTHz[i*nm : (i+1)*nm]
	w.freqs(f)
	vecs := w.eig.Vectors()
	if opt.Eigenvectors {
		copy(c.Eigvecs[i*nm*nm:(i+1)*nm*nm], vecs)
	}
	if opt.Projections {
		sw := c.SiteWeight[i*nm*ns : (i+1)*nm*ns]
		for k := 0; k < nm; k++ {
			e := vecs[k*nm : (k+1)*nm]
			for x, z := range e {
				sw[k*ns+x/p] += real(z)*real(z) + imag(z)*imag(z)
			}
		}
		averageDegenerate(f, sw, ns)
	}
	if opt.SiteTensors {
		st := c.SiteTensor[i*nm*ns*pairs : (i+1)*nm*ns*pairs]
		for k := 0; k < nm; k++ {
			for s := 0; s < ns; s++ {
				siteTensor(vecs[k*nm+s*p:k*nm+(s+1)*p], st[(k*ns+s)*pairs:(k*ns+s+1)*pairs])
			}
		}
		averageDegenerate(f, st, ns*pairs)
	}
}

// siteTensor writes the upper triangle of Re(e eᴴ), row by row, for the
// p displacement components e of one site in one mode.
func siteTensor(e []complex128, t []float64) {
	x := 0
	for a := range e {
		for b := a; b < len(e); b++ {
			t[x] = real(e[a])*real(e[b]) + imag(e[a])*imag(e[b])
			x++
		}
	}
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

// normalizeSpec checks the grid spec against the model's dimensionality
// (mesh.GridSpec.Check) and returns the problems as a *ValidationError
// with field paths under prefix.
func normalizeSpec(g mesh.GridSpec, dim int, prefix string) (mesh.GridSpec, error) {
	g, probs := g.Check(dim, prefix)
	var vs Violations
	for _, p := range probs {
		vs.Add(p.Field, "%s", p.Description)
	}
	return g, vs.Err()
}

// NormalizeGrid fills the unused mesh entries of a dim-dimensional grid spec
// with 1 and checks it, returning a *ValidationError with violations under
// the field "mesh".
func NormalizeGrid(g mesh.GridSpec, dim int) (mesh.GridSpec, error) {
	return normalizeSpec(g, dim, "mesh")
}
