package physics_test

import (
	"context"
	"errors"
	"math"
	"slices"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// hcpTyped is an invented two-site hexagonal crystal on the sites of the
// hexagonal close-packed arrangement, (1/3, 2/3, 1/4) and (2/3, 1/3, 3/4),
// with a = 3 Å, c = 5.2 Å (c/a away from the ideal ratio, so the in-plane
// and out-of-plane neighbours form separate shells), typed to 6 decimals
// as a person would: 1/3 as 0.333333, a·√3/2 as 2.598076. shift moves the
// second site along x by that many Å (a genuine distortion when non-zero).
func hcpTyped(shiftA float64) *physics.Crystal {
	return &physics.Crystal{
		Lattice: [][3]float64{{3, 0, 0}, {-1.5, 2.598076, 0}, {0, 0, 5.2}},
		Sites: []physics.Site{
			{Label: "A", MassAmu: 24, Frac: []float64{0.333333, 0.666667, 0.25}},
			{Label: "A", MassAmu: 24, Frac: []float64{0.666667 + shiftA/3, 0.333333, 0.75}},
		},
		Shells: []physics.Shell{
			{FromLabel: "A", ToLabel: "A", Shell: 1, KLong: 3, KTrans: 0.4},
			{FromLabel: "A", ToLabel: "A", Shell: 2, KLong: 2, KTrans: 0.3},
		},
	}
}

// honeycombTyped is an invented honeycomb net of two equal sites at
// (1/3, 2/3) and (2/3, 1/3) with a = 2.46 Å, typed to 6 decimals
// (a·√3/2 = 2.130422), moving in 3 directions.
func honeycombTyped() *physics.Crystal {
	return &physics.Crystal{
		Lattice: [][3]float64{{2.46, 0, 0}, {-1.23, 2.130422, 0}},
		Sites: []physics.Site{
			{Label: "A", MassAmu: 12, Frac: []float64{0.333333, 0.666667}},
			{Label: "B", MassAmu: 12, Frac: []float64{0.666667, 0.333333}},
		},
		Shells: []physics.Shell{
			{FromLabel: "A", ToLabel: "B", Shell: 1, KLong: 25, KTrans: 6},
			{FromLabel: "A", ToLabel: "A", Shell: 1, KLong: 4, KTrans: 1},
			{FromLabel: "B", ToLabel: "B", Shell: 1, KLong: 4, KTrans: 1},
		},
	}
}

func compileTol(t *testing.T, c *physics.Crystal, tolA float64) *physics.Model {
	t.Helper()
	m, err := physics.Compile(context.Background(), c, physics.Options{SymTolA: tolA})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// TestSymmetryTolerance: a crystal typed to 6 decimals gets the full group
// of the structure it stands for at the default tolerance. The hexagonal
// close-packed arrangement has space group P6₃/mmc, point group 6/mmm of
// order 24; the honeycomb net has plane group p6mm, point group 6mm of
// order 12, counted as the engine counts 2D operations (d×d integer
// matrices in the plane, time reversal not listed) (International Tables
// for Crystallography, Vol. A, the point-group and space-group tables).
// At a tolerance below the typing error only the operations that the
// typing happens to keep are found (4 for the hexagonal cell, whose
// metric rounding breaks the sixfold axis), and a cell genuinely
// distorted by 1e-2 Å keeps its lower symmetry at the default.
func TestSymmetryTolerance(t *testing.T) {
	cases := []struct {
		name string
		c    *physics.Crystal
		tolA float64
		want int
	}{
		{"hcp 6 decimals, default", hcpTyped(0), 0, 24},
		{"hcp 6 decimals, 1e-9 Å", hcpTyped(0), 1e-9, 4},
		{"honeycomb 6 decimals, default", honeycombTyped(), 0, 12},
		{"hcp distorted by 1e-2 Å, default", hcpTyped(1e-2), 0, 4},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m := compileTol(t, tc.c, tc.tolA)
			if got := len(testmodels.Symmetry(t, m)); got != tc.want {
				t.Errorf("%d operations; want %d", got, tc.want)
			}
		})
	}
}

// TestSymmetryAtLooser: SymmetryAt at 10× and 100× a too-tight tolerance
// finds what a check would suggest; it does not change the model's own.
func TestSymmetryAtLooser(t *testing.T) {
	m := compileTol(t, hcpTyped(0), 1e-9)
	ops, err := m.SymmetryAt(context.Background(), 1e-4)
	if err != nil {
		t.Fatal(err)
	}
	if len(ops) != 24 {
		t.Errorf("at 1e-4 Å: %d operations; want 24", len(ops))
	}
	if n := len(testmodels.Symmetry(t, m)); n != 4 {
		t.Errorf("the model's own tolerance: %d operations; want 4", n)
	}
}

// TestSymTolHashAndValidation: a tolerance other than the default is part
// of the model's identity; a bad one is refused naming the field.
func TestSymTolHashAndValidation(t *testing.T) {
	def := compileTol(t, hcpTyped(0), 0)
	same := compileTol(t, hcpTyped(0), physics.DefaultSymTolA)
	other := compileTol(t, hcpTyped(0), 1e-3)
	if def.Hash() != same.Hash() {
		t.Error("0 and the default tolerance give different hashes")
	}
	if def.Hash() == other.Hash() {
		t.Error("tolerance 1e-3 Å gives the default's hash")
	}
	for _, bad := range []float64{-1e-4, math.NaN(), math.Inf(1), 1, 1e-12} {
		_, err := physics.Compile(context.Background(), hcpTyped(0), physics.Options{SymTolA: bad})
		var ve *physics.ValidationError
		if !errors.As(err, &ve) || len(ve.Violations) != 1 || ve.Violations[0].Field != "symmetry_tolerance_a" {
			t.Errorf("tolerance %v: error %v; want one violation of symmetry_tolerance_a", bad, err)
		}
	}
}

// TestSymmetrize: the symmetrised hexagonal cell is a new model (new hash)
// that is exactly symmetric — all 24 operations at a tolerance of 1e-9 Å
// — its lattice exactly hexagonal, and at Γ its optic modes have the
// degeneracies 6/mmm imposes: of the 6 modes of two sites, 3 acoustic
// (zero) and the optic ones, one non-degenerate (along c) and one doubly
// degenerate (in the basal plane) pair, E-type representations of the
// point group (International Tables Vol. A; the two-dimensional irreducible
// representations of 6/mmm). Typed, they split by the typing error.
func TestSymmetrize(t *testing.T) {
	ctx := context.Background()
	typed := hcpTyped(0)
	sc, n, err := physics.Symmetrize(ctx, typed, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if n != 24 {
		t.Fatalf("symmetrised under %d operations; want 24", n)
	}
	before := compileTol(t, typed, 0)
	after := compileTol(t, sc, 0)
	if before.Hash() == after.Hash() {
		t.Error("symmetrisation kept the hash")
	}
	exact := compileTol(t, sc, 1e-9)
	if got := len(testmodels.Symmetry(t, exact)); got != 24 {
		t.Errorf("symmetrised model at 1e-9 Å: %d operations; want 24", got)
	}
	a1, a2 := sc.Lattice[0], sc.Lattice[1]
	l1, l2 := math.Hypot(a1[0], a1[1]), math.Hypot(a2[0], a2[1])
	cos := (a1[0]*a2[0] + a1[1]*a2[1]) / (l1 * l2)
	if math.Abs(l1-l2) > 1e-12 || math.Abs(cos+0.5) > 1e-12 {
		t.Errorf("symmetrised lattice |a1| = %.15g, |a2| = %.15g, cos = %.15g; want equal lengths at 120°", l1, l2, cos)
	}
	split := func(m *physics.Model) float64 {
		s := slices.Clone(m.FrequenciesTHz([3]float64{}))
		slices.Sort(s)
		// s[3..5] are the optic modes; the E pair is the two closest.
		return math.Min(s[4]-s[3], s[5]-s[4])
	}
	if d := split(after); d > 1e-9 {
		t.Errorf("symmetrised: the doubly degenerate optic pair at Γ splits by %g THz; want < 1e-9", d)
	}
	if d := split(before); d < 1e-7 {
		t.Errorf("typed: the pair splits by only %g THz; want the typing error to show (about 2e-6)", d)
	}
}

// TestSymmetrizeKeepsDistortion: a cell distorted by 1e-2 Å is not made
// symmetric at the default tolerance: symmetrisation under the 4
// operations it has leaves the distortion in place.
func TestSymmetrizeKeepsDistortion(t *testing.T) {
	sc, n, err := physics.Symmetrize(context.Background(), hcpTyped(1e-2), physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if n != 4 {
		t.Fatalf("%d operations; want 4", n)
	}
	if got := len(testmodels.Symmetry(t, compileTol(t, sc, 0))); got != 4 {
		t.Errorf("symmetrised distorted cell: %d operations; want 4", got)
	}
}
