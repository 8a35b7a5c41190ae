// Symmetry-reduced tetrahedron sums for the total DOS.

package spectra

import (
	"context"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/parallel"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// classChunk is how many classes a worker takes at a time: classes are
// few, so the accumulators (one per slice, parallel.SliceCount) stay few too.
const classChunk = 1024

// tetraAccumulateClasses is tetraAccumulate for the total DOS over simplex
// classes: each class once, weighted by its count.
func tetraAccumulateClasses(ctx context.Context, g *physics.GridModes, classes []mesh.SimplexClass, set mesh.Simplices, scale float64, grid cumGrid, hasCut bool, cut float64) (*cumAcc, error) {
	nm := g.NModes
	dim := set.Dim
	irr := g.Reduction().Irr
	workers := parallel.SliceCount(len(classes), classChunk)
	accs := make([]*cumAcc, workers)
	for w := range accs {
		accs[w] = newCumAcc(grid, 0, hasCut, cut)
	}
	freq := g.FreqTHz
	err := parallel.Slices(ctx, len(classes), classChunk, workers, func(worker, lo, hi int) {
		a := accs[worker]
		var e [4]float64
		var base [4]int
		for _, cl := range classes[lo:hi] {
			for c := 0; c <= dim; c++ {
				base[c] = irr[cl.Slot(c)] * nm
			}
			v := set.Weight * cl.Count
			for k := 0; k < nm; k++ {
				for c := 0; c <= dim; c++ {
					e[c] = freq[base[c]+k] * scale
				}
				sortValues(&e, dim+1)
				a.addSimplex(dim, &e, v)
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
