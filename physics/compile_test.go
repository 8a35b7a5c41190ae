// Tests of compilation: neighbour shells and interaction counts.

package physics

import (
	"math"
	"testing"
)

// TestShellBondCounts: the neighbour search finds the coordination shells
// of the standard structures — fcc 12 nearest neighbours at a/√2, sc 6 at
// a, bcc 8 at √3a/2 and 6 at a, rock salt 6 unlike neighbours at a/2 and
// 12 like ones at a/√2 (Kittel, Introduction to Solid State Physics,
// ch. 1) — and reports each bond once: half the neighbours for like
// labels, all of them for unlike.
func TestShellBondCounts(t *testing.T) {
	bcc := &Crystal{Lattice: [][3]float64{{-1.5, 1.5, 1.5}, {1.5, -1.5, 1.5}, {1.5, 1.5, -1.5}},
		Sites: []Site{{Label: "A", MassAmu: 1, Frac: []float64{0, 0, 0}}},
		Shells: []Shell{{FromLabel: "A", ToLabel: "A", Shell: 1, KLong: 1},
			{FromLabel: "A", ToLabel: "A", Shell: 2, KLong: 1}}}
	sc := &Crystal{Lattice: [][3]float64{{2, 0, 0}, {0, 2, 0}, {0, 0, 2}},
		Sites:  []Site{{Label: "A", MassAmu: 1, Frac: []float64{0, 0, 0}}},
		Shells: []Shell{{FromLabel: "A", ToLabel: "A", Shell: 1, KLong: 1}, {FromLabel: "A", ToLabel: "A", Shell: 3, KLong: 1}}}
	cube := supercell(t, loadExample(t, "rocksalt-like"), conventionalCell)
	cases := []struct {
		name  string
		c     *Crystal
		bonds []int
		distA []float64
	}{
		{"fcc (a = 4 Å)", loadExample(t, "fcc"), []int{6}, []float64{4 / math.Sqrt2}},
		{"sc (a = 2 Å): 6 at a, 8 at √3a", sc, []int{3, 4}, []float64{2, 2 * math.Sqrt(3)}},
		{"bcc (a = 3 Å)", bcc, []int{4, 3}, []float64{1.5 * math.Sqrt(3), 3}},
		{"rock salt (a = 5.6 Å)", loadExample(t, "rocksalt-like"), []int{6, 6, 6}, []float64{2.8, 5.6 / math.Sqrt2, 5.6 / math.Sqrt2}},
		{"rock salt conventional cell (4 P, 4 Q)", cube, []int{24, 24, 24}, []float64{2.8, 5.6 / math.Sqrt2, 5.6 / math.Sqrt2}},
		{"square net: 4 at a, 4 at √2a", loadExample(t, "square-net"), []int{2, 2}, []float64{3, 3 * math.Sqrt2}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m := mustCompile(t, tc.c)
			sh := m.Shells()
			total := len(tc.c.Springs) + len(tc.c.Blocks)
			for k, want := range tc.bonds {
				if sh[k].Bonds != want || math.Abs(sh[k].DistanceA-tc.distA[k]) > 1e-9 {
					t.Errorf("shell %d: %d bonds at %.9g Å; want %d at %.9g", k, sh[k].Bonds, sh[k].DistanceA, want, tc.distA[k])
				}
				total += want
			}
			if m.Interactions() != total {
				t.Errorf("Interactions = %d; want %d", m.Interactions(), total)
			}
		})
	}
}
