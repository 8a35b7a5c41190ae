package fcimport

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/physics"
)

// chainSet is a monatomic chain (a = 2.5 Å, 40 amu) as a supercell set of
// cells primitive cells in its n×N form (one row): Φ_xx(0,0) = 2K,
// Φ_xx(0,±1) = −K, K = 1 eV/Å² (Kittel, Introduction to Solid State
// Physics, ch. 4).
func chainSet(cells int) (*physics.Crystal, *Set) {
	c := &physics.Crystal{
		Lattice: [][3]float64{{2.5, 0, 0}}, Polarizations: 1,
		Sites: []physics.Site{{Label: "A", MassAmu: 40, Frac: []float64{0}}},
	}
	s := &Set{Matrix: []int{cells}, PrimitiveAtoms: []int{0}}
	for i := range cells {
		s.Atoms = append(s.Atoms, []float64{2.5 * float64(i), 0, 0})
		blk := make([]float64, 9)
		switch i {
		case 0:
			blk[0] = 2
		case 1, cells - 1:
			blk[0] = -1
		}
		s.Phi = append(s.Phi, blk...)
	}
	return c, s
}

// violationsOf returns the violations of a *physics.ValidationError.
func violationsOf(t *testing.T, err error) []physics.Violation {
	t.Helper()
	var ve *physics.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("err = %v; want a ValidationError", err)
	}
	return ve.Violations
}

// onlySetFields fails unless every violation names a field of the set.
func onlySetFields(t *testing.T, vs []physics.Violation) {
	t.Helper()
	for _, v := range vs {
		if !strings.HasPrefix(v.Field, "supercell_fc.") {
			t.Errorf("violation %v names a field the caller never gave", v)
		}
	}
}

// TestSupercellReach: a chain supercell of N cells folds pairs onto
// their nearest images, up to ⌊N/2⌋ cells away (two equidistant images
// at N/2 for even N). So 129 cells reach 64, within the default ±64 limit
// of a model's cell offsets, and the model folds and compiles; 130 reach
// 65 and 256 reach 128, refused as one violation of supercell_fc.matrix
// naming the offset and the limit, not as blocks[i].cell[0] (which the
// caller never gave). A smaller limit of 8 refuses 18 cells (9 > 8).
func TestSupercellReach(t *testing.T) {
	cases := []struct {
		cells   int
		lim     physics.Limits
		refused bool
		reach   string // the offset named, with its sign dropped
	}{
		{cells: 128}, {cells: 129},
		{cells: 130, refused: true, reach: "65 cells away"},
		{cells: 256, refused: true, reach: "128 cells away"},
		{cells: 17, lim: physics.Limits{MaxCellOffset: 8}},
		{cells: 18, lim: physics.Limits{MaxCellOffset: 8}, refused: true, reach: "9 cells away"},
	}
	for _, tc := range cases {
		t.Run(fmt.Sprintf("%d cells, limit %d", tc.cells, tc.lim.MaxCellOffset), func(t *testing.T) {
			c, s := chainSet(tc.cells)
			out, _, err := FoldModel(context.Background(), c, s, Options{Limits: tc.lim})
			if !tc.refused {
				if err != nil {
					t.Fatal(err)
				}
				if _, err := physics.Compile(context.Background(), out, physics.Options{Limits: tc.lim}); err != nil {
					t.Fatalf("the folded model does not compile: %v", err)
				}
				return
			}
			vs := violationsOf(t, err)
			onlySetFields(t, vs)
			limit := fmt.Sprintf("±%d limit", tc.lim.WithDefaults().MaxCellOffset)
			if len(vs) != 1 || vs[0].Field != "supercell_fc.matrix" || !strings.Contains(vs[0].Description, tc.reach) || !strings.Contains(vs[0].Description, limit) {
				t.Errorf("violations %v; want one of supercell_fc.matrix naming %q and the %s", vs, tc.reach, limit)
			}
		})
	}
}

// TestSupercellTooManyBlocks: the interaction limit is checked on the
// blocks the set folds into: a 9-cell chain gives offsets 0, ±1, …, ±4,
// nine blocks whose canonical half (Compile adds the reverses) is five.
func TestSupercellTooManyBlocks(t *testing.T) {
	c, s := chainSet(9)
	if _, _, err := FoldModel(context.Background(), c, s, Options{Limits: physics.Limits{MaxInteractions: 5}}); err != nil {
		t.Fatalf("five blocks at a limit of 5: %v", err)
	}
	_, _, err := FoldModel(context.Background(), c, s, Options{Limits: physics.Limits{MaxInteractions: 4}})
	vs := violationsOf(t, err)
	onlySetFields(t, vs)
	if len(vs) != 1 || vs[0].Field != "supercell_fc.atoms" || !strings.Contains(vs[0].Description, "5 force-constant blocks") {
		t.Errorf("violations %v; want supercell_fc.atoms naming 5 blocks", vs)
	}
}

// TestSupercellPhiRange: every element of the set is checked as a block
// element is (physics.ForceViolation), in the crystal's unit: 2e6 is
// refused in eV/Å² and accepted in N/m (its limit there is 1.6e7 N/m),
// a denormal is refused in both; the first eight bad elements are named
// and the rest counted, all at once with the other violations.
func TestSupercellPhiRange(t *testing.T) {
	c, s := chainSet(4)
	s.Phi[1] = 2e6
	if _, _, err := FoldModel(context.Background(), c, s, Options{}); err == nil || !strings.Contains(err.Error(), "supercell_fc.phi[1]") {
		t.Errorf("2e6 eV/Å²: err = %v; want supercell_fc.phi[1]", err)
	}
	c.ForceUnit = physics.NPerM
	if _, _, err := FoldModel(context.Background(), c, s, Options{}); err != nil {
		t.Errorf("2e6 N/m: %v; want accepted", err)
	}
	c, s = chainSet(4)
	for i := 9; i < 9+20; i++ {
		s.Phi[i] = 5e-310
	}
	s.Phi[3] = math.NaN()
	s.TolA = -1
	_, _, err := FoldModel(context.Background(), c, s, Options{})
	vs := violationsOf(t, err)
	onlySetFields(t, vs)
	fields := map[string]int{}
	for _, v := range vs {
		fields[v.Field]++
	}
	if fields["supercell_fc.phi[3]"] != 1 || fields["supercell_fc.phi[9]"] != 1 || fields["supercell_fc.phi[15]"] != 1 || fields["supercell_fc.phi[16]"] != 0 ||
		fields["supercell_fc.phi"] != 1 || fields["supercell_fc.tolerance_a"] != 1 {
		t.Errorf("violations %v; want phi[3] (NaN), phi[9…15], a count of the 13 more, and tolerance_a", vs)
	}
	if !strings.Contains(err.Error(), "13 more elements out of range (21 in all") {
		t.Errorf("%v; want the 13 elements beyond the first 8 counted", err)
	}
}

// TestFoldedElementRange: the fold's own arithmetic is checked too. The
// sum-rule correction puts −Σ of the neighbours on site (here 2·6e5,
// from a given on-site 1e6): past the 1e6 eV/Å² limit, refused naming
// supercell_fc.phi and the folded block. A mean that cancels to below
// physics.MinForceEVPerA2 (Φ_xy of the two rows, 3e-100 and −2.99999e-100)
// is set to 0, not refused.
func TestFoldedElementRange(t *testing.T) {
	c, s := chainSet(3)
	s.Phi[0], s.Phi[9], s.Phi[18] = 1e6, -6e5, -6e5
	_, _, err := FoldModel(context.Background(), c, s, Options{})
	vs := violationsOf(t, err)
	onlySetFields(t, vs)
	if len(vs) != 1 || vs[0].Field != "supercell_fc.phi" || !strings.Contains(vs[0].Description, "folded block Φ(site 0, cell 0; site 0, cell [0])") {
		t.Errorf("violations %v; want the folded on-site block named under supercell_fc.phi", vs)
	}

	c, s = chainSet(2)
	s.PrimitiveAtoms = nil // the N×N form: both rows of the class (0 → 1)
	phi := make([]float64, 4*9)
	phi[0], phi[3*9] = 2, 2 // on-site
	phi[9], phi[2*9] = -2, -2
	phi[9+1], phi[2*9+1] = 3e-100, -2.99999e-100
	s.Phi = phi
	out, _, err := FoldModel(context.Background(), c, s, Options{})
	if err != nil {
		t.Fatalf("a cancelling mean: %v; want its residue set to 0", err)
	}
	for _, b := range out.Blocks {
		if x := b.Phi[1]; x != 0 && math.Abs(x) < physics.MinForceEVPerA2 {
			t.Errorf("block %v: Φ_xy = %v left below the smallest accepted", b.Cell, x)
		}
	}
	if _, err := physics.Compile(context.Background(), out, physics.Options{}); err != nil {
		t.Errorf("the folded model does not compile: %v", err)
	}
}
