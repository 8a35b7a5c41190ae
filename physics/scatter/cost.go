package scatter

import (
	"context"
	"runtime"
	"unsafe"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
	"github.com/materials-lab/modegrid/physics/thermo"
)

// Cost estimates of the scattering computations, for admission control
// (the conventions of physics.Cost: everything allocated, term by term
// from the allocations the code makes, and an operation count).
// TestScatterCostLadder holds them to the measured allocation of real
// runs: never below, never more than 2× above.

// DWSizes returns the grid sizes DebyeWaller uses for m under o (none when
// Off; the half grid when it extrapolates).
func DWSizes(m *physics.Model, o DWOptions, tempK float64) []physics.GridSize {
	var out []physics.GridSize
	for _, spec := range DWGrids(o, m.Dim(), tempK) {
		out = append(out, m.GridSizeOf(spec, 0))
	}
	return out
}

// DWGrids returns the grids DebyeWaller uses for a dim-dimensional crystal
// under o (none when Off; the half grid when it extrapolates); the first is
// also the grid of a powder map's incoherent term.
func DWGrids(o DWOptions, dim int, tempK float64) []mesh.GridSpec {
	if o.Off {
		return nil
	}
	spec := o.dwSpec(dim)
	out := []mesh.GridSpec{spec}
	if h, ok := halfGrid(spec, dim); ok && tempK > 0 {
		out = append(out, h)
	}
	return out
}

// DWCost is DebyeWaller on grids of sizes: per grid, its modes with
// eigenvectors and the thermal sums with displacements at two
// temperatures, and the per-site tensors it keeps.
func DWCost(sizes []physics.GridSize) physics.Cost {
	var c physics.Cost
	for _, s := range sizes {
		c = c.Plus(physics.GridModesCost(s, physics.GridOptions{Eigenvectors: true}).Plus(thermo.ThermalCost(s, 2, true, thermo.ModeSum, true)))
		c.Bytes += 2 * allocRound(72*int64(s.Sites))
	}
	return c
}

// allocRound rounds an allocation of b bytes up as Go's allocator does:
// to its size class up to 32 KiB, to 8 KiB pages above.
func allocRound(b int64) int64 {
	if b > 32<<10 {
		return (b + 8191) &^ 8191
	}
	for _, c := range sizeClasses {
		if c >= b {
			return c
		}
	}
	return b
}

// sizeClasses are the object sizes of Go's allocator (Go 1.26:
// internal/runtime/gc/sizeclasses.go, SizeClassToSize).
var sizeClasses = []int64{0, 8, 16, 24, 32, 48, 64, 80, 96, 112, 128, 144, 160, 176, 192, 208, 224, 240, 256, 288, 320, 352,
	384, 416, 448, 480, 512, 576, 640, 704, 768, 896, 1024, 1152, 1280, 1408, 1536, 1792, 2048, 2304, 2688, 3072, 3200, 3456,
	4096, 4864, 5376, 6144, 6528, 6784, 6912, 8192, 9472, 9728, 10240, 10880, 12288, 13568, 14336, 16384, 18432, 19072,
	20480, 21760, 24576, 27264, 28672, 32768}

// workersFor is the goroutines of a parallel.For over n items in blocks.
func workersFor(s physics.GridSize, n, block int) int64 {
	w := s.Workers
	if w == 0 {
		w = runtime.GOMAXPROCS(0)
	}
	return int64(max(1, min(w, (n+block-1)/block)))
}

// spreadFlops bounds the work of spreading one line onto an axis of n
// samples: at most n samples (and 2·gaussCut·σ/step of them), 4 operations each.
func spreadFlops(n int) float64 { return 4 * float64(min(n, 4096)) }

// setupBytes is what every computation's setup holds: the sites'
// positions, masses and scatterers, the Debye–Waller result, the axis,
// and the parallel loop's goroutines and closures, with what the runtime
// allocates beside them during a call (8 KiB: the smallest call measured
// 25–31 KiB over repeated runs, this much apart).
func setupBytes(s physics.GridSize, e int) int64 {
	return 2*allocRound(96*int64(s.Sites)) + 2*allocRound(8*int64(e)) + 8192
}

// workBytes is one worker of the Q loops: a point solver with
// eigenvectors, the per-site amplitudes and the mode weights.
func workBytes(s physics.GridSize) int64 {
	n := int64(s.Modes())
	return s.PointCost().Bytes + allocRound(16*int64(s.Sites)) + allocRound(8*n) + 128
}

// linesBytes is one Lines value (three slices of n modes).
func linesBytes(n int64) int64 { return 3 * allocRound(8*n) }

// SingleCost estimates ComputeSingle for model size s at q points with e
// energies: the Debye–Waller grids (dw), one worker per 16 points (at most
// the cores), the point records and per point its lines and its row of S;
// work: a solve, the structure factor (n·n complex products) and the
// spreading of 2n lines per point.
func SingleCost(s physics.GridSize, dw []physics.GridSize, q, e int) physics.Cost {
	n := int64(s.Modes())
	c := DWCost(dw)
	c.Bytes += setupBytes(s, e) + workersFor(s, q, 16)*workBytes(s) +
		allocRound(int64(q)*int64(unsafe.Sizeof(QResult{}))) + int64(q)*(linesBytes(n)+allocRound(8*int64(e)))
	pc := s.PointCost()
	c.Flops += float64(q) * (pc.Flops + 8*float64(n*n) + 2*float64(n)*spreadFlops(e))
	return c
}

// PowderSize describes a powder map for PowderCost.
type PowderSize struct {
	Rows, E       int  // |Q| samples, energies
	MaxDirections int  // directions per sphere at most
	GroupOrder    int  // PowderGroupOrder
	DefaultAxis   bool // the window is chosen from the modes (a coarse grid first)
	QResolution   bool // the rows are broadened in |Q|
}

// PowderCost estimates ComputePowder with every row run to MaxDirections
// directions (an upper bound of the work: rows stop when converged; the
// memory does not depend on it): the Debye–Waller grids (dw), the
// coarse grid of a window from the modes, one worker per row (at most the
// cores), per row two rows of e samples (the quadratures of N and N/2) and
// its records, a copy of the rows when broadened in |Q|; work: per row the
// quadratures of MinDirections, 2·MinDirections, … MaxDirections points
// (at most 2·MaxDirections in all), of which 1/GroupOrder are computed,
// each a solve, a structure factor and 2n spread lines, the candidates'
// domain tests, and the |Q| broadening.
func PowderCost(s physics.GridSize, dw []physics.GridSize, p PowderSize) physics.Cost {
	n := int64(s.Modes())
	rows, e := int64(p.Rows), int64(p.E)
	c := DWCost(dw)
	c.Bytes += setupBytes(s, p.E) + workersFor(s, p.Rows, 1)*(workBytes(s)+linesBytes(n)) +
		rows*(2*allocRound(8*e)+64) + 4*allocRound(8*rows) + allocRound(24*rows)
	if p.QResolution {
		c.Bytes += rows*allocRound(8*e) + allocRound(24*rows)
	}
	pc := s.PointCost()
	dirs := 2 * float64(p.MaxDirections) / float64(max(1, p.GroupOrder))
	per := pc.Flops + 8*float64(n*n) + 2*float64(n)*spreadFlops(p.E)
	c.Flops += float64(rows) * (dirs*per + 2*float64(p.MaxDirections)*12 + float64(e)*4)
	if p.QResolution {
		c.Flops += float64(rows) * float64(rows) * float64(e) * 2
	}
	if p.DefaultAxis {
		c = c.Plus(physics.GridModesCost(physics.GridSize{Sites: s.Sites, P: s.P, Dim: s.Dim, Interactions: s.Interactions, Points: 512, Workers: s.Workers}, physics.GridOptions{NoSymmetry: true}))
	}
	return c
}

// IncoherentCost estimates the incoherent term of a powder map of rows
// |Q| samples, e energies and bins DOS bins (IncoherentBins) on the grid of
// size g (IncoherentSize): the grid's modes with projections, their
// per-site tetrahedron DOS, and per row, site and bin two lines spread.
func IncoherentCost(g physics.GridSize, rows, e, bins int) physics.Cost {
	c := physics.GridModesCost(g, physics.GridOptions{Projections: true})
	c = c.Plus(spectra.DOSCost(g, spectra.DOSOptions{PerSite: true}, bins, true))
	c.Bytes += allocRound(24 * int64(g.Sites))
	c.Flops += float64(rows) * float64(g.Sites) * float64(bins) * 2 * spreadFlops(e)
	return c
}

// IncoherentSize is the grid size of the incoherent term's DOS for m
// under o, and false when the map has none (X-rays, or coherent only).
func IncoherentSize(m *physics.Model, o DWOptions, probe Probe, coherentOnly bool) (physics.GridSize, bool) {
	spec, ok := IncoherentGrid(o, m.Dim(), probe, coherentOnly)
	if !ok {
		return physics.GridSize{}, false
	}
	return m.GridSizeOf(spec, 0), true
}

// IncoherentGrid is the grid of the incoherent term's DOS (the
// Debye–Waller grid of o, also when o is Off), and false when the map has
// none.
func IncoherentGrid(o DWOptions, dim int, probe Probe, coherentOnly bool) (mesh.GridSpec, bool) {
	if probe != Neutron || coherentOnly {
		return mesh.GridSpec{}, false
	}
	return o.dwSpec(dim), true
}

// MaxGroupOrder is the largest order PowderGroupOrder returns (m-3m with
// −1: 48); PowderCost with it is a lower bound of the work.
const MaxGroupOrder = 48

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
