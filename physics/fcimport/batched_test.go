package fcimport

import (
	"context"
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// TestFoldedSetAssemblesInBatches: a folded supercell set with blocks to
// every atom of the supercell — the fcc crystal with springs over ±3 cells
// written out as a 7×7×7 supercell of 343 atoms and folded back — has
// hundreds of cell offsets, so its model builds D(q) in batches of
// matrix products; its grid frequencies (batched) equal the frequencies
// of each point solved alone (one D(q) assembled by the loop) to 1e-10
// relative (derived: the two D(q) agree to rounding).
func TestFoldedSetAssemblesInBatches(t *testing.T) {
	c := testmodels.FarSprings(fcc(), 3, 1e9, 2, 1.5)
	set := fastSupercell(t, c, 7)
	f, _ := folded(t, c, set)
	m, err := physics.Compile(context.Background(), f, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if m.GridSizeOf(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}, 1).BatchPoints == 0 {
		t.Fatalf("the folded set (%d interactions) assembles point by point; want batches", m.Interactions())
	}
	t.Logf("folded set: %d blocks", m.Interactions())
	spec := mesh.GridSpec{Mesh: [3]int{5, 4, 3}}
	g, err := m.GridModes(context.Background(), spec, physics.GridOptions{NoSymmetry: true})
	if err != nil {
		t.Fatal(err)
	}
	top := testmodels.MaxAbs(g.FreqTHz)
	for i, p := range g.Points {
		alone := m.FrequenciesTHz(p.Q)
		for k, want := range alone {
			if got := g.FreqTHz[i*g.NModes+k]; math.Abs(got-want) > 1e-10*top {
				t.Fatalf("q %v mode %d: %.15g THz in the batched grid, %.15g THz alone", p.Q, k, got, want)
			}
		}
	}
}

// fastSupercell is supercell for a diagonal n×n×n matrix, atoms in order
// and exact: the blocks of c summed by (site, site, R reduced into the
// supercell) first, so that each atom pair is one look-up.
func fastSupercell(t *testing.T, c *physics.Crystal, n int) *Set {
	t.Helper()
	m := []int{n, 0, 0, 0, n, 0, 0, 0, n}
	g, err := newGeometry(c, &Set{Matrix: m, Atoms: make([][]float64, 0)})
	if g == nil {
		t.Fatal(err)
	}
	sum := map[key][9]float64{}
	for k, b := range springBlocks(c) {
		r := key{k.s, k.t, g.reduce(k.r)}
		acc := sum[r]
		for x := range b {
			acc[x] += b[x]
		}
		sum[r] = acc
	}
	var atoms []atomMap
	for s := range c.Sites {
		for a := 0; a < n; a++ {
			for b := 0; b < n; b++ {
				for cc := 0; cc < n; cc++ {
					atoms = append(atoms, atomMap{s, [3]int{a, b, cc}})
				}
			}
		}
	}
	set := &Set{Matrix: m}
	for _, a := range atoms {
		f := make([]float64, 3)
		for x := range f {
			f[x] = c.Sites[a.site].Frac[x] + float64(a.cell[x])
		}
		p := g.cart(f)
		set.Atoms = append(set.Atoms, p[:])
	}
	for _, ai := range atoms {
		for _, aj := range atoms {
			var diff [3]int
			for x := range diff {
				diff[x] = aj.cell[x] - ai.cell[x]
			}
			b := sum[key{ai.site, aj.site, g.reduce(diff)}]
			set.Phi = append(set.Phi, b[:]...)
		}
	}
	return set
}
