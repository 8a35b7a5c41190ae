package fcimport

import (
	"context"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
)

// DefaultTolA is the position tolerance (Å) used when Set.TolA is 0.
const DefaultTolA = 1e-3

// searchRange bounds the supercell translations K (each component in
// [-searchRange, searchRange]) tried for a pair's nearest image, after the
// pair's offset is first reduced into the supercell.
const searchRange = 2

// Set is a supercell force-constant set, the physics twin of
// modegrid.v1.SupercellForceConstants. Units: positions Å (or fractional),
// Phi in the crystal's force unit, TolA Å.
type Set struct {
	Matrix         []int       // d×d row-major: A_r = Σ_c Matrix[r·d+c] a_c
	Atoms          [][]float64 // Cartesian Å (3) or fractional in A_r (d)
	Fractional     bool        // Atoms are fractional in the supercell vectors
	PrimitiveAtoms []int       // empty: Phi is N×N; else Phi is n×N rows of these atoms
	Phi            []float64   // 9 per block, row-major, i-major
	TolA           float64     // 0 → DefaultTolA
	// LongRange, when set, is a long-range part of the force constants
	// between site s in cell 0 and site t in cell r (periodic with the
	// supercell), in Phi's unit: it is subtracted from every block before
	// the fold, so that only the short-range rest is folded (a polar
	// crystal's dipole–dipole part: physics/polar.SupercellPart).
	LongRange func(s, t int, r [3]int) [9]float64
}

// Report gives the largest element (force unit) of each violation before
// and after its correction: Permutation is max |Φ(s,0;t,R) − Φ(t,0;s,−R)ᵀ|
// of the folded set, SumRule is max |Σ_{t,R} Φ(s,0;t,R)| over sites (before:
// once the pairs are averaged), Invariance is max |C_g Φ(k) C_gᵀ − Φ(g·k)|
// over the pure translations of the Operations used to symmetrise and one
// operation per rotation (every operation is a product of one of each, so
// it is 0 exactly when the set is invariant under all; groupaverage.go)
// (before: of the folded set as given; both zero without symmetrisation).
// The after values are those of the final set.
type Report struct {
	PermutationBefore, PermutationAfter float64
	SumRuleBefore, SumRuleAfter         float64
	Multiplicities                      int // pairs shared among >1 equidistant image
	Operations                          int // space-group operations averaged over (0: not symmetrised)
	InvarianceBefore, InvarianceAfter   float64
}

// Options choose what FoldModel does beyond the fold and its corrections.
type Options struct {
	// Symmetrize makes the primitive cell exactly symmetric as for any
	// model (physics.Symmetrize of its lattice and sites: metric and
	// positions averaged over the operations found within SymTolA) and
	// averages the folded set over the space group of that cell (every
	// operation, internal translations of a cell that is not primitive
	// included).
	Symmetrize bool
	// SymTolA is the symmetry tolerance, Å; 0 means
	// physics.DefaultSymTolA.
	SymTolA float64
	// Limits are those the folded model will be compiled with (zero
	// fields: the defaults). A set that would fold past them — a cell
	// offset, the number of blocks, an element's range — is refused with
	// the set's own field paths (limits.go).
	Limits physics.Limits
	// MaxSymmetrizeFlops bounds the symmetrisation's work (0: no bound).
	// Its cost depends on the space group, known only once the cell's
	// operations are found: then, before any pass over the blocks,
	// SymmetrizeFlops is compared with it and a set past it is refused (a
	// violation of supercell_fc naming the operations and the bound).
	MaxSymmetrizeFlops float64
}

// FoldBytes estimates what FoldModel allocates for a set of n primitive
// sites and atoms supercell atoms (n·atoms pair blocks), with or without
// symmetrisation: the pair maps, the image memo, the folded and corrected
// maps, the sorted keys, the two n×n SVDs and the model's blocks. Measured
// (TestFoldBytes; allocated bytes, which the service counts as held):
// about 2–2.8 kB a pair block as folded, 3–5.6 kB symmetrised, plus
// fixed buffers; the figures here are above every measurement.
func FoldBytes(n, atoms int, sym bool) int64 {
	per, fixed := int64(3<<10), int64(256<<10)
	if sym {
		per, fixed = 6656, int64(512<<10)
	}
	return per*int64(n)*int64(atoms) + 48*int64(n)*int64(n) + fixed
}

// symPassFlops is the work charged per block and operation of one pass
// of the symmetrisation (the image key, C Φ Cᵀ and a map access, about
// 330 ns measured on this project's machine for 10⁴–10⁵ blocks, so
// counted as 500 operations at physics.FlopsPerCoreSecond).
const symPassFlops = 500

// SymmetrizeFlops is the work of symmetrising a folded set of blocks
// blocks over a group of trans pure translations and rots rotations: four
// passes (the invariance before and after, the closure of the support and
// the average), each over every block for each translation and each
// rotation's representative (groupaverage.go).
func SymmetrizeFlops(blocks, trans, rots int) float64 {
	return 4 * float64(blocks) * float64(trans+rots) * symPassFlops
}

// key names a folded block Φ(s, 0; t, R).
type key struct {
	s, t int
	r    [3]int
}

// atomMap is where a supercell atom sits: site and reduced cell offset.
type atomMap struct {
	site int
	cell [3]int
}

// Fold maps, folds and corrects the set s for the primitive cell of c and
// returns the blocks (the canonical half: each pair once, plus on-site
// blocks) in c's force unit. Invalid input gives a *physics.ValidationError
// listing every violation with field paths under "supercell_fc". It returns
// ctx.Err() if ctx ends first (polled once per row of the set).
func Fold(ctx context.Context, c *physics.Crystal, s *Set) ([]physics.Block, Report, error) {
	m, rep, err := FoldModel(ctx, c, s, Options{})
	if err != nil {
		return nil, rep, err
	}
	return m.Blocks, rep, nil
}

// FoldModel is Fold returning the model: c's lattice and sites (made
// exactly symmetric with opt.Symmetrize) with the folded blocks in place
// of its springs, shells and blocks. The steps, in order: fold; with
// Symmetrize, the support closed under the group; permutation symmetry by
// averaging each pair; the sum rule by its least-squares correction; with
// Symmetrize, the group average, then the pairs averaged once more (the
// average keeps the other two properties to rounding; see groupaverage.go).
func FoldModel(ctx context.Context, c *physics.Crystal, s *Set, opt Options) (*physics.Crystal, Report, error) {
	var rep Report
	g, maps, err := checkSet(c, s, opt.Limits)
	if err != nil {
		return nil, rep, err
	}
	out := *c
	out.Springs, out.Shells, out.Blocks = nil, nil, nil
	var ops []symOp
	if opt.Symmetrize {
		if ops, err = symmetricCell(ctx, &out, opt.SymTolA); err != nil {
			return nil, rep, err
		}
	}
	fc, err := g.fold(ctx, s, maps)
	if err != nil {
		return nil, rep, err
	}
	if len(ops) > 0 && opt.MaxSymmetrizeFlops > 0 {
		trans, reps := factorGroup(ops)
		if f := SymmetrizeFlops(len(fc), len(trans), len(reps)); f > opt.MaxSymmetrizeFlops {
			var vs physics.Violations
			vs.Add("supercell_fc", "symmetrising the folded set (%d blocks over %d operations: %d translations × %d rotations) takes about %.3g floating-point operations, over the bound of %.3g; fold without symmetrize, or give a larger bound",
				len(fc), len(ops), len(trans), len(reps), f, opt.MaxSymmetrizeFlops)
			return nil, rep, vs.Err()
		}
	}
	rep.Multiplicities = g.shared
	if err := g.correct(ctx, fc, ops, &rep); err != nil {
		return nil, rep, err
	}
	out.Blocks = blocksOf(fc, g.d)
	flushTiny(out.Blocks, c.ForceUnit)
	if err := checkFolded(out.Blocks, g.d, c.ForceUnit, opt.Limits); err != nil {
		return nil, rep, err
	}
	return &out, rep, nil
}

// checkSet checks the set against c and lim before any folding: its
// numbers, its shape, the mapping of its atoms, and what it would fold
// into (checkReach). Every violation comes at once, except those that a
// broken shape or mapping hides. It returns the geometry and the atoms'
// places.
func checkSet(c *physics.Crystal, s *Set, lim physics.Limits) (*geometry, []atomMap, error) {
	var vs physics.Violations
	checkPhi(&vs, s.Phi, c.ForceUnit)
	g, err := newGeometry(c, s)
	var maps []atomMap
	if err == nil {
		if maps, err = g.mapAtoms(s); err == nil {
			err = g.checkReach(s, maps, lim)
		}
	}
	vs.AddErr("", "supercell_fc", err)
	if err := vs.Err(); err != nil {
		return nil, nil, err
	}
	return g, maps, nil
}

// symmetricCell makes c (lattice and sites, no interactions) exactly
// symmetric by physics.Symmetrize and returns its space group.
func symmetricCell(ctx context.Context, c *physics.Crystal, tolA float64) ([]symOp, error) {
	sym, _, err := physics.Symmetrize(ctx, c, physics.Options{SymTolA: tolA})
	if err != nil {
		return nil, err
	}
	*c = *sym
	if tolA == 0 {
		tolA = physics.DefaultSymTolA
	}
	return spaceGroup(ctx, c, tolA)
}

// correct imposes permutation symmetry, the sum rule and (with ops)
// invariance under the operations on fc, in place, and reports each.
func (g *geometry) correct(ctx context.Context, fc map[key][9]float64, ops []symOp, rep *Report) error {
	var idx *indexedSet
	if len(ops) > 0 {
		// The support closed first (zero blocks at missing images, which
		// the invariance counts as zero anyway), then indexed once.
		if err := closeUnderGroup(ctx, fc, ops, g.d); err != nil {
			return err
		}
		var err error
		if idx, err = newIndexedSet(ctx, fc, ops, g.d); err != nil {
			return err
		}
		idx.load(fc)
		if rep.InvarianceBefore, err = idx.invariance(ctx); err != nil {
			return err
		}
	}
	rep.PermutationBefore = permute(fc)
	rep.SumRuleBefore = sumRuleViolation(fc, g.nsites)
	if err := imposeSumRule(fc, g.nsites); err != nil {
		return err
	}
	if idx != nil {
		idx.load(fc)
		if err := idx.average(ctx); err != nil {
			return err
		}
		idx.store(fc)
		permute(fc)
		rep.Operations = len(ops)
		idx.load(fc)
		var err error
		if rep.InvarianceAfter, err = idx.invariance(ctx); err != nil {
			return err
		}
	}
	rep.PermutationAfter = permutationViolation(fc)
	rep.SumRuleAfter = sumRuleViolation(fc, g.nsites)
	return nil
}

// geometry holds the primitive and supercell lattices.
type geometry struct {
	d, nsites int
	lat       [][3]float64 // primitive vectors
	m         []int        // supercell matrix
	minv      []float64    // its inverse, row-major
	det       int
	frac      [][]float64 // site fractional positions
	tol       float64
	shared    int
	memo      map[imageKey][][3]int // images by pair class
	cands     []imageCand           // searchImages' buffer
}

// newGeometry checks the set's shape and prepares the lattices.
func newGeometry(c *physics.Crystal, s *Set) (*geometry, error) {
	var vs physics.Violations
	d := c.Dim()
	g := &geometry{d: d, nsites: len(c.Sites), lat: c.Lattice, m: s.Matrix, tol: s.TolA}
	if d < 1 || d > 3 || g.nsites == 0 {
		vs.Add("lattice", "the primitive cell needs 1 to 3 lattice vectors and at least one site")
		return nil, vs.Err()
	}
	for _, st := range c.Sites {
		if len(st.Frac) != d {
			vs.Add("sites", "every site needs %d fractional coordinates", d)
			return nil, vs.Err()
		}
		g.frac = append(g.frac, st.Frac)
	}
	if g.tol == 0 {
		g.tol = DefaultTolA
	}
	if !(g.tol > 0) || math.IsInf(g.tol, 0) {
		vs.Add("supercell_fc.tolerance_a", "must be a positive finite length in Å or 0, got %v", s.TolA)
	}
	if len(s.Matrix) != d*d {
		vs.Add("supercell_fc.matrix", "needs %d integers (d×d), got %d", d*d, len(s.Matrix))
		return nil, vs.Err()
	}
	g.det, g.minv = inverse(s.Matrix, d)
	if g.det == 0 {
		vs.Add("supercell_fc.matrix", "is singular (determinant 0)")
		return nil, vs.Err()
	}
	n := abs(g.det) * g.nsites
	if len(s.Atoms) != n {
		vs.Add("supercell_fc.atoms", "needs |det M|×sites = %d atoms, got %d", n, len(s.Atoms))
	}
	rows := n
	if len(s.PrimitiveAtoms) > 0 {
		rows = g.nsites
		if len(s.PrimitiveAtoms) != g.nsites {
			vs.Add("supercell_fc.primitive_atoms", "needs one atom per site (%d), got %d", g.nsites, len(s.PrimitiveAtoms))
		}
		for i, a := range s.PrimitiveAtoms {
			if a < 0 || a >= len(s.Atoms) {
				vs.Add(fmt.Sprintf("supercell_fc.primitive_atoms[%d]", i), "atom %d is not in 0..%d", a, len(s.Atoms)-1)
			}
		}
	}
	if len(s.Phi) != 9*rows*len(s.Atoms) {
		vs.Add("supercell_fc.phi", "needs 9×%d×%d = %d numbers, got %d", rows, len(s.Atoms), 9*rows*len(s.Atoms), len(s.Phi))
	}
	return g, vs.Err()
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// inverse returns det M and M⁻¹ (row-major) of the d×d integer matrix.
func inverse(m []int, d int) (int, []float64) {
	a := func(r, c int) int { return m[r*d+c] }
	switch d {
	case 1:
		if m[0] == 0 {
			return 0, nil
		}
		return m[0], []float64{1 / float64(m[0])}
	case 2:
		det := a(0, 0)*a(1, 1) - a(0, 1)*a(1, 0)
		if det == 0 {
			return 0, nil
		}
		f := 1 / float64(det)
		return det, []float64{f * float64(a(1, 1)), -f * float64(a(0, 1)), -f * float64(a(1, 0)), f * float64(a(0, 0))}
	}
	cof := func(r, c int) int {
		r1, r2 := (r+1)%3, (r+2)%3
		c1, c2 := (c+1)%3, (c+2)%3
		return a(r1, c1)*a(r2, c2) - a(r1, c2)*a(r2, c1)
	}
	det := a(0, 0)*cof(0, 0) + a(0, 1)*cof(0, 1) + a(0, 2)*cof(0, 2)
	if det == 0 {
		return 0, nil
	}
	inv := make([]float64, 9)
	for r := 0; r < 3; r++ {
		for c := 0; c < 3; c++ {
			inv[r*3+c] = float64(cof(c, r)) / float64(det)
		}
	}
	return det, inv
}
