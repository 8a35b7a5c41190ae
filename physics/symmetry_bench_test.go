package physics_test

import (
	"context"
	"fmt"
	"math/rand/v2"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// BenchmarkReduceGrid times the irreducible-point search itself (cache
// bypassed) for the fcc example.
func BenchmarkReduceGrid(b *testing.B) {
	m := testmodels.Compile(b, testmodels.Load(b, "fcc"))
	for _, n := range []int{48, 96} {
		spec, _ := physics.NormalizeGrid(mesh.GridSpec{Mesh: [3]int{n, n, n}}, 3)
		var rots [][3][3]int
		for _, op := range testmodels.Symmetry(b, m) {
			if mesh.Compatible(op.QRot, spec) {
				rots = append(rots, op.QRot)
			}
		}
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			for b.Loop() {
				ir, err := mesh.Reduce(context.Background(), rots, spec, nil)
				if err != nil {
					b.Fatal(err)
				}
				benchSink = ir
			}
		})
	}
}

// benchSink keeps benchmark results alive.
var benchSink any

// BenchmarkSymmetrySearch times the symmetry search on a size ladder of
// supercells of the cubic-pair crystal written as primitive cells (8, 32,
// 128 and 256 sites), in three kinds: "symmetric" (sites 2e-5 Å and
// springs 1e-10 off: the full group of the supercell), "fc-noise" (springs
// 1 % off: the sites map under every operation but the force constants
// break all of them but the identity: the worst case of a direct search)
// and "displaced" (sites 0.02 Å off: only the identity maps them). The
// "direct" variants run the search as it was before (every site against
// every site, whole dynamical matrices for every candidate), kept with the
// tests as the reference; the ratio of the two is the speed-up.
func BenchmarkSymmetrySearch(b *testing.B) {
	for _, sites := range []int{8, 32, 128, 256} {
		for _, kind := range []struct {
			name       string
			posA, relK float64
		}{{"symmetric", 2e-5, 1e-10}, {"fc-noise", 0, 1e-2}, {"displaced", 0.02, 0}} {
			rng := rand.New(rand.NewPCG(uint64(sites), 5))
			m := testmodels.Compile(b, testmodels.Distorted(testmodels.Sized(b, sites), rng, kind.posA, kind.relK))
			for _, direct := range []bool{false, true} {
				name := fmt.Sprintf("sites=%d/%s", sites, kind.name)
				search := m.SymmetryAt
				if direct {
					name += "/direct"
					search = m.SymmetryReference
				}
				b.Run(name, func(b *testing.B) {
					for b.Loop() {
						ops, err := search(context.Background(), m.SymTolA())
						if err != nil {
							b.Fatal(err)
						}
						benchSink = ops
						b.ReportMetric(float64(len(ops)), "ops")
					}
				})
			}
		}
	}
}
