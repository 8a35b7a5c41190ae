// Tests of the cost estimates against the allocation of real runs.

package polar_test

import (
	"context"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/polar"
)

// TestCostEstimates: the estimates of the infrared response and of the
// term's set-up lie between 1× and 2× of what the real runs allocate
// (the convention of physics/cost.go), for 2, 3 and 16 sites and 11 to
// 5001 samples.
func TestCostEstimates(t *testing.T) {
	big := rockSalt(1.2, iso(3)) // as a 2×2×2 supercell of its fcc cell: 16 sites
	var sites []physics.Site
	var lat [][3]float64
	for k := 0; k < 3; k++ {
		lat = append(lat, [3]float64{2 * big.Lattice[k][0], 2 * big.Lattice[k][1], 2 * big.Lattice[k][2]})
	}
	for x := 0; x < 8; x++ {
		n := [3]float64{float64(x / 4), float64(x / 2 % 2), float64(x % 2)}
		for _, s := range big.Sites {
			s.Frac = []float64{(s.Frac[0] + n[0]) / 2, (s.Frac[1] + n[1]) / 2, (s.Frac[2] + n[2]) / 2}
			sites = append(sites, s)
		}
	}
	big = &physics.Crystal{Lattice: lat, Sites: sites, Shells: big.Shells, EpsilonInf: big.EpsilonInf}
	for _, tc := range []struct {
		name string
		c    *physics.Crystal
	}{{"2 sites", rockSalt(1.2, iso(3))}, {"3 sites", fluorite(1.1)}, {"16 sites", big}} {
		m := compile(t, tc.c, 0)
		setup := testmodels.MeasureAlloc(t, func() {
			if _, err := polar.NewTerm(context.Background(), m, polar.Params{}); err != nil {
				t.Fatal(err)
			}
		})
		sz, err := polar.Estimate(tc.c)
		if err != nil {
			t.Fatal(err)
		}
		est := sz.BuildCost(len(tc.c.Sites)).Bytes
		t.Logf("%s, set-up: estimate %d bytes, measured %d (%.2f×)", tc.name, est, setup, float64(est)/float64(setup))
		if est < setup || est > 2*setup {
			t.Errorf("%s, set-up: estimate %d bytes, measured %d; want 1× to 2×", tc.name, est, setup)
		}
		for _, n := range []int{11, 1001, 5001} {
			got := testmodels.MeasureAlloc(t, func() {
				if _, err := polar.Infrared(context.Background(), m, polar.IROptions{Direction: [3]float64{1, 0, 0}, Points: n}); err != nil {
					t.Fatal(err)
				}
			})
			est := polar.InfraredCost(m.GridSizeOf(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}, 1), n).Bytes
			t.Logf("%s, %d samples: estimate %d bytes, measured %d (%.2f×)", tc.name, n, est, got, float64(est)/float64(got))
			if est < got || est > 2*got {
				t.Errorf("%s, %d samples: estimate %d bytes, measured %d; want 1× to 2×", tc.name, n, est, got)
			}
		}
	}
}
