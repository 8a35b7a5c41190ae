package physics_test

import (
	"context"
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// farModel is the cubic pair (or a supercell of it) with springs to every
// site within reach cells: as many cell offsets as the folded force
// constants of a (2·reach+1)-fold supercell. Invented constants.
func farModel(t testing.TB, sites, reach int) *physics.Model {
	c := testmodels.CubicPair()
	if sites > 2 {
		c = testmodels.Sized(t, sites)
	}
	return testmodels.Compile(t, testmodels.FarSprings(c, reach, 1e9, 2, 1.5))
}

// stackCases are the models on which the batched assembly is compared
// with the loop: the examples and the random models (given a stack by
// force, in both orientations of the products), and far-reaching models
// that take the stack on their own.
func stackCases(t *testing.T) []struct {
	name string
	m    *physics.Model
} {
	var cs []struct {
		name string
		m    *physics.Model
	}
	add := func(name string, m *physics.Model) {
		cs = append(cs, struct {
			name string
			m    *physics.Model
		}{name, m})
	}
	for _, name := range testmodels.Names(t) {
		m := testmodels.Compile(t, testmodels.Load(t, name))
		m.SetStack(true)
		add(name, m)
	}
	for _, pc := range testmodels.PropCases(t)[:8] {
		m := testmodels.Compile(t, pc.C)
		m.SetStack(true)
		add(fmt.Sprintf("random seed %d", pc.Seed), m)
	}
	for _, f := range []struct{ sites, reach int }{{2, 5}, {16, 2}} {
		m := farModel(t, f.sites, f.reach)
		if !m.HasStack() {
			t.Fatalf("%d sites with springs over ±%d cells: no stack; the crossover should choose one", f.sites, f.reach)
		}
		add(fmt.Sprintf("%d sites, springs over ±%d cells", f.sites, f.reach), m)
	}
	return cs
}

// TestBatchedAssemblyMatchesLoop: D(q) built in batches by the two matrix
// products equals the one assembled alone, to 1e-13 of the largest
// element (derived: both sum the same products, cell by cell), at random
// q-points, Γ and a zone-boundary point, in batches of every length up to
// the stack's.
func TestBatchedAssemblyMatchesLoop(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 41))
	for _, tc := range stackCases(t) {
		t.Run(tc.name, func(t *testing.T) {
			m := tc.m
			qs := [][3]float64{{}, {0.5, 0.5, 0.5}}
			for len(qs) < 2*m.BatchPoints()+3 {
				var q [3]float64
				for k := 0; k < m.Dim(); k++ {
					q[k] = 4*rng.Float64() - 2
				}
				qs = append(qs, q)
			}
			got := m.BatchedDynamicalMatrices(qs)
			for k, q := range qs {
				want := m.DynamicalMatrix(q, nil)
				var scale, worst float64
				for x := range want {
					scale = math.Max(scale, cmplx.Abs(want[x]))
					worst = math.Max(worst, cmplx.Abs(got[k][x]-want[x]))
				}
				if worst > 1e-13*scale {
					t.Fatalf("q %v: batched D differs by %.3g (largest element %.3g)", q, worst, scale)
				}
			}
		})
	}
}

// TestStackedGridModes: grid modes (frequencies and site weights, with and
// without symmetry) and a modes stream of a model that assembles in
// batches equal those of the same model assembling each q alone, to 1e-10
// relative (derived: the two D(q) agree to rounding).
func TestStackedGridModes(t *testing.T) {
	ctx := context.Background()
	batched := farModel(t, 2, 5)
	alone := farModel(t, 2, 5)
	alone.SetStack(false)
	if !batched.HasStack() || alone.HasStack() {
		t.Fatal("the two models do not assemble differently")
	}
	spec := mesh.GridSpec{Mesh: [3]int{7, 6, 5}}
	for _, opt := range []physics.GridOptions{{Projections: true}, {Projections: true, NoSymmetry: true}} {
		g1 := testmodels.Modes(t, batched, spec, opt)
		g2 := testmodels.Modes(t, alone, spec, opt)
		if !testmodels.CloseSlices(g1.FreqTHz, g2.FreqTHz, 1e-10) || !testmodels.CloseSlices(g1.SiteWeight, g2.SiteWeight, 1e-10) {
			t.Fatalf("NoSymmetry=%v: batched and per-point grid modes differ", opt.NoSymmetry)
		}
	}
	pts := spec.Points()
	stream := func(m *physics.Model) []float64 {
		var f []float64
		err := m.StreamModes(ctx, pts, physics.ModeOptions{Eigenvectors: true, ChunkSize: 50}, func(c physics.ModeChunk) error {
			for _, p := range c.Points {
				f = append(f, p.FreqTHz...)
			}
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		return f
	}
	f1, f2 := stream(batched), stream(alone)
	if !testmodels.CloseSlices(f1, f2, 1e-10) {
		t.Fatal("batched and per-point streams differ")
	}
}

// TestCancelStackedGridModes: the grid modes of a model that assembles in
// batches stop when cancelled.
func TestCancelStackedGridModes(t *testing.T) {
	m := farModel(t, 2, 5)
	lat := testmodels.CancelMidway(t, 0, func(ctx context.Context) error {
		_, err := m.GridModes(ctx, mesh.GridSpec{Mesh: [3]int{40, 40, 40}}, physics.GridOptions{NoSymmetry: true})
		return err
	})
	t.Logf("GridModes, batched assembly: returned %v after cancellation", lat)
}

// TestStackChoice: models with few cell offsets per block or few blocks
// keep the loop (the examples, supercells with nearest-neighbour springs:
// their stack would be mostly zeros), models with springs over many cells
// take the products (the costs of dynbatch.go, measured by
// TestAssemblyTable).
func TestStackChoice(t *testing.T) {
	for _, name := range testmodels.Names(t) {
		if testmodels.Compile(t, testmodels.Load(t, name)).HasStack() {
			t.Errorf("%s assembles in batches; want the loop", name)
		}
	}
	for _, sites := range []int{64, 128} {
		if testmodels.Compile(t, testmodels.LowSymmetry(t, sites)).HasStack() {
			t.Errorf("the %d-site nearest-neighbour supercell assembles in batches; want the loop", sites)
		}
	}
	for _, f := range []struct{ sites, reach int }{{2, 3}, {2, 8}, {16, 2}, {64, 1}} {
		if !farModel(t, f.sites, f.reach).HasStack() {
			t.Errorf("%d sites with springs over ±%d cells assembles by the loop; want batches", f.sites, f.reach)
		}
	}
}
