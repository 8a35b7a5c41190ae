package physics

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"sync"
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
		if n := g.Mesh[0] * g.Mesh[1] * g.Mesh[2]; n > MaxGridPoints || n < 0 {
			vs.add(prefix, "%d points is more than the engine limit of %d", n, MaxGridPoints)
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
	n := g.Count()
	pts := make([]QPoint, 0, n)
	s0, s1, s2 := g.Offset(0), g.Offset(1), g.Offset(2)
	w := 1 / float64(n)
	for a := 0; a < g.Mesh[0]; a++ {
		for b := 0; b < g.Mesh[1]; b++ {
			for c := 0; c < g.Mesh[2]; c++ {
				pts = append(pts, QPoint{Q: [3]float64{
					wrapHalf((float64(a) + s0) / float64(g.Mesh[0])),
					wrapHalf((float64(b) + s1) / float64(g.Mesh[1])),
					wrapHalf((float64(c) + s2) / float64(g.Mesh[2])),
				}, Weight: w})
			}
		}
	}
	return pts
}

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
	Spec   GridSpec
	Points []QPoint
	NModes int // modes per point (sites × p)
	NSites int
	P      int
	// FreqTHz[i*NModes+k] is mode k at point i, ascending, THz; imaginary
	// modes negative.
	FreqTHz []float64
	// SiteWeight[(i*NModes+k)*NSites+s] is Σ_α |e_{sα}|² of mode k at point
	// i: the share of site s in the mode (sums to 1 over sites). Nil unless
	// projections were asked for.
	SiteWeight []float64
	// Eigvecs holds, when asked, the eigenvectors of every point:
	// Eigvecs[(i*NModes+k)*NModes+c]. Nil unless asked.
	Eigvecs []complex128
}

// GridOptions selects what GridModes keeps beyond frequencies.
type GridOptions struct {
	Projections  bool // per-site weights
	Eigenvectors bool // full eigenvectors (memory: N·n² complex numbers)
}

// GridModes diagonalises D(q) on every point of the grid, spread over all
// cores, and stops early when ctx is done.
func (m *Model) GridModes(ctx context.Context, spec GridSpec, opt GridOptions) (*GridModes, error) {
	spec, err := spec.normalize(m.dim, "mesh")
	if err != nil {
		return nil, err
	}
	pts := spec.Points()
	nm := m.Modes()
	g := &GridModes{Spec: spec, Points: pts, NModes: nm, NSites: m.nsites, P: m.p,
		FreqTHz: make([]float64, len(pts)*nm)}
	vec := opt.Projections || opt.Eigenvectors
	if opt.Projections {
		g.SiteWeight = make([]float64, len(pts)*nm*m.nsites)
	}
	if opt.Eigenvectors {
		g.Eigvecs = make([]complex128, len(pts)*nm*nm)
	}
	err = parallelRange(ctx, len(pts), func(lo, hi int) {
		buf := make([]complex128, nm*nm)
		for i := lo; i < hi; i++ {
			buf = m.DynamicalMatrix(pts[i].Q, buf)
			vals, vecs := hermitianEigen(buf, nm, vec)
			for k, v := range vals {
				g.FreqTHz[i*nm+k] = eigToTHz(v)
			}
			if opt.Eigenvectors {
				copy(g.Eigvecs[i*nm*nm:], vecs)
			}
			if opt.Projections {
				for k := 0; k < nm; k++ {
					for c := 0; c < nm; c++ {
						z := vecs[k*nm+c]
						g.SiteWeight[(i*nm+k)*m.nsites+c/m.p] += real(z)*real(z) + imag(z)*imag(z)
					}
				}
			}
		}
	})
	if err != nil {
		return nil, err
	}
	return g, nil
}

// parallelRange runs fn over [0, n) in chunks on all cores, checking ctx
// between chunks; it returns ctx.Err() if ctx ended first.
func parallelRange(ctx context.Context, n int, fn func(lo, hi int)) error {
	workers := runtime.GOMAXPROCS(0)
	chunk := 64
	var next int
	var mu sync.Mutex
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				if ctx.Err() != nil {
					return
				}
				mu.Lock()
				lo := next
				next += chunk
				mu.Unlock()
				if lo >= n {
					return
				}
				fn(lo, min(lo+chunk, n))
			}
		}()
	}
	wg.Wait()
	return ctx.Err()
}
