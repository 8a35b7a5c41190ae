package physics_test

import (
	"context"
	"fmt"
	"math/rand/v2"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// searchCase is one model on which the symmetry search is compared with
// the direct search, at the given tolerances (0: the default).
type searchCase struct {
	name string
	c    *physics.Crystal
	tols []float64
}

// searchCases are the models of TestSymmetrySearchMatchesReference: the
// examples, the hand-made low-symmetry and tolerance models, supercells
// written as primitive cells (exact, with noise below the tolerance,
// with force constants or positions that break the symmetry, with one
// mass per site), and sites closer together than the tolerance (where the
// lowest-numbered free site must win).
func searchCases(t *testing.T) []searchCase {
	rng := rand.New(rand.NewPCG(11, 12))
	tols := []float64{1e-9, 0, 1e-2}
	var cs []searchCase
	for _, name := range testmodels.Names(t) {
		cs = append(cs, searchCase{name, testmodels.Load(t, name), tols})
	}
	cs = append(cs,
		searchCase{"triclinic", testmodels.Triclinic(), tols},
		searchCase{"fcc with one extra bond", testmodels.BrokenFCC(t), tols},
		searchCase{"hcp typed", hcpTyped(0), tols},
		searchCase{"hcp distorted 1e-2 Å", hcpTyped(1e-2), tols},
		searchCase{"honeycomb typed", honeycombTyped(), tols},
		searchCase{"near sites", nearSites(), []float64{1e-5, 0, 1e-3}},
		searchCase{"cubic pair 2x2x4", testmodels.Sized(t, 32), []float64{0}},
		searchCase{"cubic pair 2x2x4, force constants 1e-3 off", testmodels.Distorted(testmodels.Sized(t, 32), rng, 0, 1e-3), []float64{0}},
		searchCase{"cubic pair 2x2x4, sites 0.02 Å off", testmodels.Distorted(testmodels.Sized(t, 32), rng, 0.02, 0), []float64{0, 0.05}},
		searchCase{"cubic pair 4x4x2, one mass per site", oneMassPerSite(testmodels.Sized(t, 64)), []float64{0}},
		searchCase{"rock-salt-like 2x2x2 cubes", testmodels.BigCrystal(t, 2, 2, 2), []float64{0}},
		// A 4×4×4 supercell of a two-site crystal as a 128-site cell,
		// its sites and springs within the tolerance of symmetric.
		searchCase{"cubic pair 4x4x4, noise below the tolerance", testmodels.Distorted(testmodels.Sized(t, 128), rng, 2e-5, 1e-10), []float64{0}},
	)
	// Force constants and positions off by amounts around the tolerance,
	// so that some comparisons fall close to it on either side.
	for _, rel := range []float64{1e-4, 1e-3, 2e-3, 3e-3, 4e-3, 6e-3, 1e-2} {
		cs = append(cs, searchCase{fmt.Sprintf("cubic pair 2x2x2, force constants %g off", rel), testmodels.Distorted(testmodels.Sized(t, 16), rng, 0, rel), []float64{0}})
	}
	for _, posA := range []float64{3e-5, 6e-5, 1e-4} {
		cs = append(cs, searchCase{fmt.Sprintf("cubic pair 2x2x2, sites %g Å off", posA), testmodels.Distorted(testmodels.Sized(t, 16), rng, posA, 0), []float64{0}})
	}
	for _, pc := range testmodels.PropCases(t) {
		cs = append(cs, searchCase{fmt.Sprintf("random seed %d", pc.Seed), pc.C, []float64{0}})
	}
	return cs
}

// nearSites is an invented simple cubic crystal of two equal sites 5e-5 Å
// apart (and a third elsewhere): at tolerances above that, each site's
// image lies within the tolerance of both, and the mapping must take the
// lowest-numbered free one, as the direct search does.
func nearSites() *physics.Crystal {
	return &physics.Crystal{
		Lattice: [][3]float64{{2.9, 0, 0}, {0, 2.9, 0}, {0, 0, 2.9}},
		Sites: []physics.Site{
			{Label: "A", MassAmu: 20, Frac: []float64{0, 0, 0}},
			{Label: "A", MassAmu: 20, Frac: []float64{5e-5 / 2.9, 0, 0}},
			{Label: "B", MassAmu: 50, Frac: []float64{0.5, 0.5, 0.5}},
		},
		Shells: []physics.Shell{
			{FromLabel: "A", ToLabel: "B", Shell: 1, KLong: 2, KTrans: 0.3},
			{FromLabel: "B", ToLabel: "B", Shell: 1, KLong: 1, KTrans: 0.1},
		},
	}
}

// oneMassPerSite gives every site its own mass: no operation but the
// identity maps the sites.
func oneMassPerSite(c *physics.Crystal) *physics.Crystal {
	for i := range c.Sites {
		c.Sites[i].MassAmu = 20 + 0.25*float64(i)
	}
	return c
}

// TestSymmetrySearchMatchesReference: the symmetry search (site bins,
// early rejection) finds exactly what the direct search finds — the same
// operations in the same order, with the same translations, Cartesian
// rotations, site permutations and cells — on every model of searchCases
// and at several tolerances. Derived: both decide every candidate by the
// same comparisons (see physics/symsearch.go).
func TestSymmetrySearchMatchesReference(t *testing.T) {
	ctx := context.Background()
	for _, sc := range searchCases(t) {
		m := testmodels.Compile(t, sc.c)
		for _, tol := range sc.tols {
			if tol == 0 {
				tol = m.SymTolA()
			}
			t.Run(fmt.Sprintf("%s/tol=%g", sc.name, tol), func(t *testing.T) {
				want, err := m.SymmetryReference(ctx, tol)
				if err != nil {
					t.Fatal(err)
				}
				got, err := m.SymmetryAt(ctx, tol)
				if err != nil {
					t.Fatal(err)
				}
				t.Logf("%d operations", len(got))
				if msg := diffOps(got, want); msg != "" {
					t.Fatalf("%d operations, direct search %d: %s", len(got), len(want), msg)
				}
			})
		}
	}
}

// diffOps describes the first difference between two operation lists, or
// returns "".
func diffOps(got, want []physics.SymOp) string {
	if len(got) != len(want) {
		return "counts differ"
	}
	for k := range got {
		g, w := got[k], want[k]
		switch {
		case g.Rot != w.Rot:
			return fmt.Sprintf("op %d: rotation %v, want %v", k, g.Rot, w.Rot)
		case g.Trans != w.Trans:
			return fmt.Sprintf("op %d: translation %v, want %v", k, g.Trans, w.Trans)
		case g.Cart != w.Cart || g.QRot != w.QRot:
			return fmt.Sprintf("op %d: Cartesian or q rotation differs", k)
		case fmt.Sprint(g.Perm) != fmt.Sprint(w.Perm):
			return fmt.Sprintf("op %d: permutation %v, want %v", k, g.Perm, w.Perm)
		case fmt.Sprint(g.Shift) != fmt.Sprint(w.Shift):
			return fmt.Sprintf("op %d: cells %v, want %v", k, g.Shift, w.Shift)
		}
	}
	return ""
}
