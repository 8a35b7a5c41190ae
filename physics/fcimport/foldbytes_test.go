package fcimport

import (
	"context"
	"fmt"
	"math/rand/v2"
	"runtime"
	"testing"

	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// TestFoldBytes: FoldBytes, which the service reserves from its memory
// budget before folding a set, is never below what FoldModel allocates
// and not more than 4× above, for supercells of the two-site cubic
// crystal as primitive cells (8 and 32 sites, supercells 1×1×1 and
// 2×2×2, with and without symmetrisation). Allocation, not time: the same
// on a loaded machine.
func TestFoldBytes(t *testing.T) {
	for _, sites := range []int{8, 32} {
		for _, k := range []int{1, 2} {
			for _, sym := range []bool{false, true} {
				rng := rand.New(rand.NewPCG(uint64(sites), uint64(k)))
				c := testmodels.Distorted(testmodels.Sized(t, sites), rng, 1e-5, 0)
				s, _ := supercell(t, c, []int{k, 0, 0, 0, k, 0, 0, 0, k}, nil, 0)
				var m0, m1 runtime.MemStats
				runtime.GC()
				runtime.ReadMemStats(&m0)
				if _, _, err := FoldModel(context.Background(), c, s, Options{Symmetrize: sym}); err != nil {
					t.Fatal(err)
				}
				runtime.ReadMemStats(&m1)
				got, est := int64(m1.TotalAlloc-m0.TotalAlloc), FoldBytes(sites, len(s.Atoms), sym)
				name := fmt.Sprintf("%d sites, %d atoms, symmetrize %v", sites, len(s.Atoms), sym)
				t.Logf("%s: allocated %d, estimate %d (%.2f×)", name, got, est, float64(est)/float64(got))
				if est < got || est > 4*got {
					t.Errorf("%s: estimate %d B against %d B allocated; want 1–4×", name, est, got)
				}
			}
		}
	}
}
