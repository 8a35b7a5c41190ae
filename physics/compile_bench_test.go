package physics

import (
	"context"
	"fmt"
	"testing"
)

var compileSink *Model

// BenchmarkCompile is the cost of Compile on the examples and on 8- and
// 64-site supercells of the rock-salt-like one (neighbour search, force
// constants, blocks of D(q), hash and lattice type); the symmetry and the
// long-wave limit are lazy and not included.
func BenchmarkCompile(b *testing.B) {
	rs := loadExample(b, "rocksalt-like")
	cube := supercell(b, rs, conventionalCell)
	cases := []struct {
		name string
		c    *Crystal
	}{
		{"chain", loadExample(b, "chain")},
		{"fcc", loadExample(b, "fcc")},
		{"rocksalt-like", rs},
		{"sites=8", cube},
		{"sites=64", supercell(b, cube, [3][3]int{{2, 0, 0}, {0, 2, 0}, {0, 0, 2}})},
	}
	for _, tc := range cases {
		b.Run(fmt.Sprintf("%s", tc.name), func(b *testing.B) {
			for b.Loop() {
				m, err := Compile(context.Background(), tc.c, Options{})
				if err != nil {
					b.Fatal(err)
				}
				compileSink = m
			}
		})
	}
}
