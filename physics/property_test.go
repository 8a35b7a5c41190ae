// Property-based tests: invariants that every valid model must satisfy,
// checked on random models (1–8 sites, 1–3 dimensions, springs over six
// orders of magnitude) drawn from fixed seeds. A failure prints the seed and
// the model so that it can be reproduced. More models:
//
//	go test -run TestProperty ./physics/... -args -props.n=500

package physics_test

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// TestPropertyReducedGrid: the frequencies at every point of the grid are
// the same whether computed through the irreducible wedge (symmetry and
// time reversal, ReduceGrid) or at every point directly (NoSymmetry): the
// operations are symmetries of D(q) (Maradudin & Vosko, Rev. Mod. Phys. 40,
// 1 (1968)). Compared as signed ω² to 1e-10 of the largest (eigenvalues are
// exact to a few ε‖D‖, package eigen). At least a third of the models must have
// been reduced to fewer points than the grid, or the test proves nothing.
func TestPropertyReducedGrid(t *testing.T) {
	ctx := testmodels.Ctx(t)
	cases := testmodels.PropCases(t)
	reduced := 0
	for _, pc := range cases {
		full, err := pc.M.GridModes(ctx, pc.Spec, physics.GridOptions{NoSymmetry: true})
		if err != nil {
			t.Fatalf("%v\n%v", err, pc)
		}
		red, err := pc.M.GridModes(ctx, pc.Spec, physics.GridOptions{})
		if err != nil {
			t.Fatalf("%v\n%v", err, pc)
		}
		if red.Diagonalized < len(red.Points) {
			reduced++
		}
		if len(red.FreqTHz) != len(full.FreqTHz) {
			t.Fatalf("reduced grid has %d frequencies, full %d\n%v", len(red.FreqTHz), len(full.FreqTHz), pc)
		}
		top := testmodels.MaxAbs(full.FreqTHz)
		sq := func(f float64) float64 { return math.Copysign(f*f, f) }
		for i, f := range full.FreqTHz {
			if d := math.Abs(sq(red.FreqTHz[i]) - sq(f)); d > 1e-10*top*top {
				pt := i / full.NModes
				t.Errorf("q=%v mode %d: reduced %.12g THz, direct %.12g THz (%d of %d points diagonalised)\n%v",
					full.Points[pt].Q, i%full.NModes, red.FreqTHz[i], f, red.Diagonalized, len(red.Points), pc)
				break
			}
		}
	}
	if reduced*3 < len(cases) {
		t.Errorf("only %d of %d grids were reduced; the test needs symmetry to act", reduced, len(cases))
	}
}

// TestPropertyHashPerturbation: the model hash is a cache key, so two
// models that give different results must never share it (hash.go: "any
// change that moves a result changes it"). Every number of every random
// model is moved by one part in 10¹²; wherever that changes the compiled
// model at all, the hash must change. Stability is not needed here, so
// every drawn model is used.
func TestPropertyHashPerturbation(t *testing.T) {
	const rel = 1e-12
	checked, same := 0, 0
	var fails []string
	for _, seed := range testmodels.PropSeeds() {
		c := testmodels.RandomProperCrystal(testmodels.PropRNG(seed))
		m, err := physics.Compile(context.Background(), c, physics.Options{})
		if err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		refs := numbersOf(testmodels.Clone(c))
		for k, ref := range refs {
			pc := testmodels.Clone(c)
			p := numbersOf(pc)[k].p
			if *p == 0 {
				continue
			}
			*p *= 1 + rel
			pm, err := physics.Compile(context.Background(), pc, physics.Options{})
			if err != nil {
				t.Fatalf("seed %d, %s × (1 + %g): %v", seed, ref.name, rel, err)
			}
			if physics.SamePhysics(m, pm) {
				same++
				continue
			}
			checked++
			if pm.Hash() == m.Hash() {
				b, _ := json.Marshal(c)
				fails = append(fails, fmt.Sprintf("seed %d: %s = %.17g × (1 + %g) keeps hash %s; model %s", seed, ref.name, *ref.p, rel, m.Hash()[:12], b))
			}
		}
	}
	if checked == 0 {
		t.Fatal("no perturbation changed a model; the test proves nothing")
	}
	if len(fails) > 0 {
		show := fails
		if len(show) > 5 {
			show = show[:5]
		}
		t.Errorf("%d of %d perturbations by one part in 1e12 that change the model keep its hash (%d changed nothing); first ones:\n%s",
			len(fails), checked, same, joinLines(show))
	}
}

func joinLines(s []string) string {
	out := ""
	for _, x := range s {
		out += "  " + x + "\n"
	}
	return out
}
