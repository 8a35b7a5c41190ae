package spectra

import (
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/parallel"
)

// Cost estimate of ComputeDOS, for admission control (the conventions of
// physics.Cost: memory allocated and an operation count).

// simplicesPerCell is d!: the simplices of one grid cell (mesh.GridSimplices).
func simplicesPerCell(dim int) int64 { return [4]int64{1, 1, 2, 6}[min(max(dim, 1), 3)] }

// accBytes is one cumAcc of ns sites on a cumGrid of n abscissae: val and
// step, and with sites sval, sstep, cutSite and four scratch rows.
func accBytes(n, ns int64) int64 {
	b := 16*n + 8 + 256
	if ns > 0 {
		b += 16*n*ns + 8*ns + 8*ns + 4*8*ns
	}
	return b
}

// DOSCost estimates ComputeDOS on grid modes of size s (not included: add
// GridModesCost) for samples frequency samples (the window divided by the
// step; DefaultDOSBins when chosen from the modes). Memory, from dos.go,
// tetra.go and tetra_sym.go: for the total tetrahedron DOS of a reduced
// grid, the simplex classes (8 B of key per simplex, 8 B more for the
// radix sort, 16 B per class at most one per simplex); up to detSlices
// accumulators on 2·samples+1 abscissae (per site too with projections);
// the resolved totals; the result's series (3 per sample, plus one per
// site and per label with projections, labels ≤ sites). Work: every
// simplex (or point, for Gaussian and histogram) and band, with the
// samples it spans estimated from the spread of frequencies across one
// grid cell.
func DOSCost(s physics.GridSize, opt DOSOptions, samples int, reduced bool) physics.Cost {
	ns := int64(0)
	if opt.PerSite {
		ns = int64(s.Sites)
	}
	S := int64(samples)
	acc := 2*S + 1
	var c physics.Cost
	simplices := simplicesPerCell(s.Dim) * int64(s.Points)
	// One accumulator per slice of the work (parallel.SliceCount).
	accs := int64(parallel.SliceCount(s.Points, modeChunk))
	if opt.Method == Tetrahedron {
		accs = int64(parallel.SliceCount(s.Points, tetraChunk))
		if reduced && !opt.PerSite {
			// Classes: keys, the radix sort's buffer and its digit
			// counts (1<<16 ints), the classes; then one accumulator per
			// slice of at most one class per simplex.
			c.Bytes += 32*simplices + 8<<16 + 16<<10 // 16 kB: the cache key and headers
			accs = int64(parallel.SliceCount(int(simplices), classChunk))
		}
	}
	if opt.Method != Tetrahedron {
		// modeAccumulate: one accumulator per slice of the orbits (the
		// diagonalised points), each with an orbit's site shares and Φ
		// on the samples; for a reduced grid the orbits (an int32 a
		// point, two an orbit).
		orbits := s.Points
		if reduced && s.Irreducible > 0 {
			orbits = min(s.Irreducible, s.Points)
		}
		accs = int64(parallel.SliceCount(orbits, modeChunk))
		c.Bytes += accs * (8*int64(s.Modes())*ns + 8*acc)
		if reduced {
			c.Bytes += 4*int64(s.Points) + 8*int64(orbits) + 8
		}
	}
	c.Bytes += accs*accBytes(acc, ns) + 8*acc*(1+ns) + 8*ns
	placed := s.Points // points (tetrahedra) or orbits (Gaussian, histogram) placed
	if opt.Method != Tetrahedron && reduced && s.Irreducible > 0 {
		placed = min(s.Irreducible, s.Points)
	}
	c.Bytes += 24*S + 16*S*ns + 64*ns + 16<<10
	// Samples a band spans inside one simplex: the band's range over the
	// zone (at most the window) divided by the points per direction.
	perDir := math.Pow(float64(max(1, s.Points)), 1/float64(min(max(s.Dim, 1), 3)))
	span := 2 + float64(S)/perDir
	bands := float64(s.Modes())
	switch opt.Method {
	case Tetrahedron:
		c.Flops = float64(simplices) * bands * (60 + span*(4+4*float64(ns)))
	default:
		// Each orbit placed once, after its points' site shares are summed.
		c.Flops = float64(placed)*bands*(20+span*(8+2*float64(ns))) + float64(s.Points)*bands*3*float64(ns)
	}
	return c
}
