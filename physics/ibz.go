package physics

import (
	"context"
	"github.com/materials-lab/modegrid/physics/internal/parallel"
	"math"
	"math/cmplx"

	"github.com/materials-lab/modegrid/physics/mesh"
)

// ReduceGrid returns the irreducible points of spec under the model's
// symmetry operations and time reversal. With a cache (nil: none),
// reductions are kept there and shared by every model with the same
// q-space operations, so repeated requests on one lattice and grid reduce
// once. The first call on a model finds its symmetry (Symmetry); that and
// the reduction of a large grid poll ctx, and ctx.Err() is returned when
// ctx ends first (nothing partial is cached).
func (m *Model) ReduceGrid(ctx context.Context, spec mesh.GridSpec, cache *mesh.ReductionCache) (*mesh.IrreducibleGrid, error) {
	spec, err := normalizeSpec(spec, m.dim, "mesh")
	if err != nil {
		return nil, err
	}
	ir, _, err := m.reduceGrid(ctx, spec, cache)
	return ir, err
}

// reduceGrid reduces the normalised spec and returns the reduction with
// the model's operations its Rots are the q-space parts of (OpIndex refers
// to both).
func (m *Model) reduceGrid(ctx context.Context, spec mesh.GridSpec, cache *mesh.ReductionCache) (*mesh.IrreducibleGrid, []SymOp, error) {
	ops, err := m.gridOps(ctx, spec)
	if err != nil {
		return nil, nil, err
	}
	ir, err := mesh.Reduce(ctx, qRots(ops), spec, cache)
	if err != nil {
		return nil, nil, err
	}
	return ir, ops, nil
}

// qRots are the q-space rotations of ops, in order.
func qRots(ops []SymOp) [][3][3]int {
	rots := make([][3][3]int, len(ops))
	for i, op := range ops {
		rots[i] = op.QRot
	}
	return rots
}

// gridOps are the model's operations that map the (normalised) grid onto
// itself.
func (m *Model) gridOps(ctx context.Context, spec mesh.GridSpec) ([]SymOp, error) {
	sym, err := m.Symmetry(ctx)
	if err != nil {
		return nil, err
	}
	var ops []SymOp
	for _, op := range sym {
		if mesh.Compatible(op.QRot, spec) {
			ops = append(ops, op)
		}
	}
	return ops, nil
}

// unfoldSiteWeights fills the site weights of grid point g from those of
// its representative: the share of site Perm[i] at q_g equals the share of
// site i at q (time reversal conjugates the eigenvector and leaves shares
// unchanged).
func unfoldSiteWeights(op *SymOp, nmodes, nsites int, src, dst []float64) {
	for k := 0; k < nmodes; k++ {
		for i := 0; i < nsites; i++ {
			dst[k*nsites+op.Perm[i]] = src[k*nsites+i]
		}
	}
}

// unfoldEigvecs rotates the eigenvectors of the representative q into
// those at the image q' = S q: e'_{π(i)α} = exp(−2πi q'·L_i) Σ_β C_αβ e_{iβ}
// (from D(q') = U D(q) U†, see symsearch.go), conjugated when time reversal is
// applied.
func unfoldEigvecs(op *SymOp, timeReversal bool, qImage [3]float64, p, nsites int, src, dst []complex128) {
	nm := p * nsites
	if timeReversal {
		// q_g = −S q: the eigenvector at S q is needed before conjugation.
		for a := range qImage {
			qImage[a] = -qImage[a]
		}
	}
	for i := 0; i < nsites; i++ {
		var arg float64
		for a := 0; a < 3; a++ {
			arg += qImage[a] * float64(op.Shift[i][a])
		}
		ph := cmplx.Rect(1, -2*math.Pi*arg)
		pi := op.Perm[i]
		for k := 0; k < nm; k++ {
			for a := 0; a < p; a++ {
				var z complex128
				for b := 0; b < p; b++ {
					z += complex(op.Cart[a][b], 0) * src[k*nm+i*p+b]
				}
				z *= ph
				if timeReversal {
					z = cmplx.Conj(z)
				}
				dst[k*nm+pi*p+a] = z
			}
		}
	}
}

// unfold spreads the modes computed at the irreducible points (c, indexed
// by position in ir.Irr) onto every point of the grid.
func (m *Model) unfold(ctx context.Context, ir *mesh.IrreducibleGrid, ops []SymOp, c *GridModes, opt GridOptions) (*GridModes, error) {
	pts := c.Points
	nm, ns, p := c.NModes, c.NSites, c.P
	pairs := p * (p + 1) / 2
	g := &GridModes{ModelHash: c.ModelHash, Spec: c.Spec, Points: pts, NModes: nm, NSites: ns, P: p,
		FreqTHz: make([]float64, len(pts)*nm), Diagonalized: c.Diagonalized, irr: ir, cache: opt.Cache}
	if opt.Projections {
		g.SiteWeight = make([]float64, len(pts)*nm*ns)
	}
	if opt.Eigenvectors {
		g.Eigvecs = make([]complex128, len(pts)*nm*nm)
	}
	if opt.SiteTensors {
		g.SiteTensor = make([]float64, len(pts)*nm*ns*pairs)
	}
	err := parallel.Chunks(ctx, len(pts), 64, func(lo, hi int) {
		for i := lo; i < hi; i++ {
			s := int(ir.Slot[i])
			copy(g.FreqTHz[i*nm:(i+1)*nm], c.FreqTHz[s*nm:(s+1)*nm])
			if !vecOpts(opt) {
				continue
			}
			k := int(ir.OpIndex[i])
			tr := k < 0
			if tr {
				k = -k - 1
			}
			op := &ops[k]
			if opt.Projections {
				unfoldSiteWeights(op, nm, ns, c.SiteWeight[s*nm*ns:(s+1)*nm*ns], g.SiteWeight[i*nm*ns:(i+1)*nm*ns])
			}
			if opt.SiteTensors {
				unfoldSiteTensors(op, nm, ns, p, c.SiteTensor[s*nm*ns*pairs:(s+1)*nm*ns*pairs], g.SiteTensor[i*nm*ns*pairs:(i+1)*nm*ns*pairs])
			}
			if opt.Eigenvectors {
				unfoldEigvecs(op, tr, pts[i].Q, p, ns, c.Eigvecs[s*nm*nm:(s+1)*nm*nm], g.Eigvecs[i*nm*nm:(i+1)*nm*nm])
			}
		}
	})
	if err != nil {
		return nil, err
	}
	return g, nil
}

func vecOpts(o GridOptions) bool { return o.Projections || o.Eigenvectors || o.SiteTensors }

// unfoldSiteTensors maps the per-site tensors t_ab = Re(e_a e_b*) of the
// representative to the image point: site Perm[i] gets C t_i Cᵀ (C the p×p
// Cartesian rotation; the phase of unfoldEigvecs cancels in e e†, and time
// reversal conjugates e e†, leaving its real part unchanged).
func unfoldSiteTensors(op *SymOp, nmodes, nsites, p int, src, dst []float64) {
	pairs := p * (p + 1) / 2
	var t, r [3][3]float64
	for k := 0; k < nmodes; k++ {
		for i := 0; i < nsites; i++ {
			in := src[(k*nsites+i)*pairs : (k*nsites+i+1)*pairs]
			x := 0
			for a := 0; a < p; a++ {
				for b := a; b < p; b++ {
					t[a][b], t[b][a] = in[x], in[x]
					x++
				}
			}
			for a := 0; a < p; a++ {
				for b := 0; b < p; b++ {
					var v float64
					for c := 0; c < p; c++ {
						for e := 0; e < p; e++ {
							v += op.Cart[a][c] * t[c][e] * op.Cart[b][e]
						}
					}
					r[a][b] = v
				}
			}
			out := dst[(k*nsites+op.Perm[i])*pairs : (k*nsites+op.Perm[i]+1)*pairs]
			x = 0
			for a := 0; a < p; a++ {
				for b := a; b < p; b++ {
					out[x] = r[a][b]
					x++
				}
			}
		}
	}
}

// CheapSymmetrySites is the largest model (sites) whose symmetry
// IrreducibleCount finds on the spot when it is not yet known: the search
// grows with sites² per candidate operation, milliseconds up to here.
const CheapSymmetrySites = 16

// IrreducibleCount returns the number of irreducible points of spec for m
// and true when it is known cheaply: the reduction is in the cache r, or the
// grid is small enough (mesh.CheapReduction) to reduce now, the model's symmetry
// being known or cheap to find (CheapSymmetrySites) (the reduction is
// then kept in the cache for the computation that follows). Otherwise it
// returns IrreducibleUpperBound and false. Admission control uses it to
// estimate a grid computation before any large work.
func IrreducibleCount(r *mesh.ReductionCache, m *Model, spec mesh.GridSpec) (int, bool) {
	spec, err := normalizeSpec(spec, m.dim, "mesh")
	if err != nil {
		return 0, false
	}
	bound := mesh.IrreducibleUpperBound(spec.Count(), m.dim)
	if _, known := m.sym.peek(); !known && m.nsites > CheapSymmetrySites {
		return bound, false // finding the symmetry is work to admit first
	}
	// Known, or a search of milliseconds (CheapSymmetrySites): not
	// cancellable from here, and not needed to be.
	ops, err := m.gridOps(context.Background(), spec)
	if err != nil {
		return bound, false
	}
	rots := qRots(ops)
	if ir, ok := r.Lookup(rots, spec); ok {
		return len(ir.Irr), true
	}
	if spec.Count() <= mesh.CheapReduction {
		ir, err := mesh.Reduce(context.Background(), rots, spec, r)
		if err != nil {
			return bound, false
		}
		return len(ir.Irr), true
	}
	return bound, false
}
