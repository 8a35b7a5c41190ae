package scatter

import (
	"context"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
	"github.com/materials-lab/modegrid/physics/thermo"
)

// Cost estimates of the scattering computations, for admission control
// (the conventions of physics.Cost: memory allocated, an operation count).

// DWSizes returns the grid sizes DebyeWaller uses for m under o (none when
// Off; the half grid when it extrapolates).
func DWSizes(m *physics.Model, o DWOptions, tempK float64) []physics.GridSize {
	if o.Off {
		return nil
	}
	spec := o.dwSpec(m.Dim())
	out := []physics.GridSize{m.GridSizeOf(spec, 0)}
	if h, ok := halfGrid(spec, m.Dim()); ok && tempK > 0 {
		out = append(out, m.GridSizeOf(h, 0))
	}
	return out
}

// DWCost is DebyeWaller on grids of sizes: per grid, its modes with
// eigenvectors and the thermal sums with displacements at two
// temperatures (the grids run one after the other; the memory of the
// larger is counted for both, a bound).
func DWCost(sizes []physics.GridSize) physics.Cost {
	var c physics.Cost
	for _, s := range sizes {
		g := physics.GridModesCost(s, physics.GridOptions{Eigenvectors: true}).Plus(thermo.ThermalCost(s, 2, true, thermo.ModeSum, true))
		c.Bytes = max(c.Bytes, g.Bytes)
		c.Flops += g.Flops
	}
	return c
}

// spreadFlops bounds the work of spreading one line onto an axis of n
// samples: at most n samples (and 2·gaussCut·σ/step of them), 4 operations each.
func spreadFlops(n int) float64 { return 4 * float64(min(n, 4096)) }

// SingleCost estimates ComputeSingle for model size s at q points with e
// energies: the Debye–Waller grids (dw), one point solver per worker, and
// per point the lines (3 numbers a mode), the map row and the point
// record; work: a solve, the structure factor (n·n complex products) and
// the spreading of 2n lines per point.
func SingleCost(s physics.GridSize, dw []physics.GridSize, q, e int) physics.Cost {
	n := int64(s.Modes())
	pc := s.PointCost()
	workers := int64(max(1, s.Workers))
	if s.Workers == 0 {
		workers = 8
	}
	c := DWCost(dw)
	c.Bytes += workers*pc.Bytes + int64(q)*(24*n+8*int64(e)+160) + 8*int64(e) + 1024
	c.Flops += float64(q) * (pc.Flops + 8*float64(n*n) + 2*float64(n)*spreadFlops(e))
	return c
}

// PowderCost estimates ComputePowder with every row run to maxDirs
// directions (an upper bound: rows stop when converged): per row the
// quadratures of MinDirections, 2·MinDirections, … maxDirs points (at most
// 2·maxDirs in all), of which 1/order are computed (order: PowderGroupOrder),
// each a solve, a structure factor and 2n spread lines; the candidates'
// domain tests; rows of e samples twice (the last and the one before) and
// their |Q| broadening.
func PowderCost(s physics.GridSize, dw []physics.GridSize, rows, e, maxDirs, order int) physics.Cost {
	n := int64(s.Modes())
	pc := s.PointCost()
	c := DWCost(dw)
	c.Bytes += 8*pc.Bytes + 3*int64(rows)*8*int64(e) + 64*int64(rows) + 1024
	dirs := 2 * float64(maxDirs) / float64(max(1, order))
	per := pc.Flops + 8*float64(n*n) + 2*float64(n)*spreadFlops(e)
	c.Flops += float64(rows) * (dirs*per + 2*float64(maxDirs)*12 + float64(e)*4)
	c.Flops += float64(rows) * float64(rows) * float64(e) * 2 // |Q| broadening, at most
	// the default window's coarse grid
	c = c.Plus(physics.GridModesCost(physics.GridSize{Sites: s.Sites, P: s.P, Dim: s.Dim, Interactions: s.Interactions, Points: 512}, physics.GridOptions{NoSymmetry: true}))
	return c
}

// PowderGroupOrder is the order of the group whose fundamental domain
// ComputePowder's directions fill (the point group, with −1, of the
// operations that keep the scatterers): the divisor of PowderCost.
func PowderGroupOrder(ctx context.Context, m *physics.Model, sites []SiteScatterer) (int, error) {
	if len(sites) != m.Sites() {
		return 2, nil
	}
	_, order, err := powderDomain(ctx, m, sites)
	return order, err
}

// WeightedDOSCost estimates ComputeWeightedDOS on grid size g with e
// energies: the modes with projections, the per-site tetrahedron DOS, and
// the broadening of every site's bins.
func WeightedDOSCost(g physics.GridSize, reduced bool, e int) physics.Cost {
	c := physics.GridModesCost(g, physics.GridOptions{Projections: true})
	c = c.Plus(spectra.DOSCost(g, spectra.DOSOptions{PerSite: true}, e, reduced))
	c.Bytes += int64(g.Sites+3) * 8 * int64(e) * 2
	c.Flops += float64(g.Sites) * float64(e) * spreadFlops(e)
	return c
}

// dwSpecOf is the grid of o for a d-dimensional crystal (exported through
// DWMesh for the server's parameters).
func DWMesh(o DWOptions, dim int) mesh.GridSpec { return o.dwSpec(dim) }
