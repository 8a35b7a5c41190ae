package physics_test

import (
	"context"
	"fmt"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

var compileSink *physics.Model

// BenchmarkCompile is the cost of Compile on the examples and on 8- and
// 64-site supercells of the rock-salt-like one (neighbour search, force
// constants, blocks of D(q), hash and lattice type); the symmetry and the
// long-wave limit are lazy and not included.
func BenchmarkCompile(b *testing.B) {
	rs := testmodels.Load(b, "rocksalt-like")
	cube := testmodels.Supercell(b, rs, testmodels.ConventionalCell)
	cases := []struct {
		name string
		c    *physics.Crystal
	}{
		{"chain", testmodels.Load(b, "chain")},
		{"fcc", testmodels.Load(b, "fcc")},
		{"rocksalt-like", rs},
		{"sites=8", cube},
		{"sites=64", testmodels.Supercell(b, cube, [3][3]int{{2, 0, 0}, {0, 2, 0}, {0, 0, 2}})},
	}
	for _, tc := range cases {
		b.Run(fmt.Sprintf("%s", tc.name), func(b *testing.B) {
			for b.Loop() {
				m, err := physics.Compile(context.Background(), tc.c, physics.Options{})
				if err != nil {
					b.Fatal(err)
				}
				compileSink = m
			}
		})
	}
}
