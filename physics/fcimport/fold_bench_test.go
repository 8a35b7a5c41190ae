package fcimport

import (
	"context"
	"fmt"
	"testing"
)

// BenchmarkFold: the rock-salt set of an L×L×L supercell (2L³ atoms,
// N×N blocks) folded as given and symmetrised over its 48 operations.
func BenchmarkFold(b *testing.B) {
	for _, l := range []int{2, 4, 6} {
		t := &testing.T{}
		s, _ := supercell(t, rocksalt(), []int{l, 0, 0, 0, l, 0, 0, 0, l}, nil, 0)
		for _, sym := range []bool{false, true} {
			b.Run(fmt.Sprintf("atoms=%d/sym=%v", len(s.Atoms), sym), func(b *testing.B) {
				for b.Loop() {
					if _, _, err := FoldModel(context.Background(), rocksalt(), s, Options{Symmetrize: sym}); err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}
