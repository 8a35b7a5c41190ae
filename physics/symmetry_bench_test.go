package physics_test

import (
	"context"
	"fmt"
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
