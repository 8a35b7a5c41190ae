package server

// The pre-compile bound of a model given as a supercell force-constant
// set (SupercellForceConstants, folded by physics/fcimport before the
// compile). Both figures are lower bounds read from the message alone,
// and both are zero when the set's shape is not the one Fold accepts
// (N = n·|det M| atoms, 9·rows·N numbers): Fold then fails at once, in its
// validation, and lists the problems.

import (
	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/fcimport"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// fcShape is the size of a well-formed set: n primitive sites, N atoms,
// rows the number of atoms Φ has rows for (N, or n with primitive_atoms),
// det = |det M|, d the dimensionality; sym when it is to be symmetrised
// (ModelSource.symmetrize).
type fcShape struct {
	n, atoms, rows, det, d int
	sym                    bool
}

// fcShapeOf reads the set's shape; ok is false without a set or when it
// is not well formed.
func fcShapeOf(cr *modegridv1.Crystal) (fcShape, bool) {
	fc := cr.GetSupercellFc()
	d, n := len(cr.GetLattice()), len(cr.GetSites())
	if fc == nil || d < 1 || d > 3 || len(fc.GetMatrix()) != d*d {
		return fcShape{}, false
	}
	det := intDet(fc.GetMatrix(), d)
	if det < 0 {
		det = -det
	}
	s := fcShape{n: n, atoms: len(fc.GetAtoms()), rows: len(fc.GetAtoms()), det: det, d: d}
	if len(fc.GetPrimitiveAtoms()) > 0 {
		s.rows = len(fc.GetPrimitiveAtoms())
	}
	if det == 0 || s.atoms != n*det || s.rows != n && s.rows != s.atoms || len(fc.GetPhi()) != 9*s.rows*s.atoms {
		return fcShape{}, false
	}
	return s, true
}

// intDet is the determinant of the d×d integer matrix m (row-major).
func intDet(m []int32, d int) int {
	a := func(r, c int) int { return int(m[r*d+c]) }
	switch d {
	case 1:
		return a(0, 0)
	case 2:
		return a(0, 0)*a(1, 1) - a(0, 1)*a(1, 0)
	}
	return a(0, 0)*(a(1, 1)*a(2, 2)-a(1, 2)*a(2, 1)) - a(0, 1)*(a(1, 0)*a(2, 2)-a(1, 2)*a(2, 0)) + a(0, 2)*(a(1, 0)*a(2, 1)-a(1, 1)*a(2, 0))
}

// foldedInteractions is a lower bound of the blocks the fold gives, never
// above the set's own block count (rows·N): every row atom meets every
// atom in at least one image, so the folded set has at least n·N distinct
// (s, t, R) blocks (the rows of one site cover its N partners at distinct
// R modulo the supercell), and Compile is given the canonical half of
// them, each block and its transposed partner once: at least ⌈n·N/2⌉.
func (s fcShape) foldedInteractions() int { return (s.n*s.atoms + 1) / 2 }

// foldCost is a lower bound of the fold's own work and an estimate of its
// memory (fcimport.FoldBytes: measured allocation per pair block, with and
// without symmetrisation, the bound tested against it; the same figure is
// reserved from the budget while a set is folded). The work:
//
//   - image search: the nearest images are searched once per class
//     (s, t, offset modulo the supercell), n²·|det M| classes, each trying
//     (2·searchRange+1)^d = 5^d supercell translations at no fewer than
//     d² + 4d + 4 operations (the translation K·M, d² multiply-adds; the
//     fractional difference, d; its Cartesian form, 3d; the length, 4);
//   - accumulation: every one of the rows·N blocks is added, 9 numbers
//     with a weight, at least 18 operations;
//   - the sum-rule solve: two dense n×n systems (the symmetric and
//     antisymmetric parts; fcimport's imposeSumRule), each factorised by
//     SVD (gonum, single-threaded); the Householder bidiagonalisation
//     alone is 8n³/3 operations each (Golub & Van Loan, Matrix
//     Computations, 4th ed., §5.4.8: 4mn² − 4n³/3 for m×n);
//   - with symmetrisation, the invariance measured before and after and
//     the group average, three passes over the n·N blocks for each of
//     |G| ≥ 1 operations (the identity at least: the group is not known
//     before the search; once it is, the fold prices the passes itself,
//     fcimport.Options.MaxSymmetrizeFlops), each C Φ Cᵀ at least 54
//     multiply-adds and its image key d² + 2d.
//
// The work is turned into time like every estimate (physics.Cost.Seconds)
// on one core, since none of the fold runs in parallel.
func (s fcShape) foldCost() physics.Cost {
	per := 1.0
	for range s.d {
		per *= 5
	}
	ops := float64(s.d)
	search := float64(s.n*s.n*s.det) * per * (ops*ops + 4*ops + 4)
	accumulate := 18 * float64(s.rows) * float64(s.atoms)
	m := float64(s.n)
	svd := 2 * 8 * m * m * m / 3
	bytes := fcimport.FoldBytes(s.n, s.atoms, s.sym)
	var sym float64
	if s.sym {
		sym = 3 * float64(s.n*s.atoms) * (54 + ops*ops + 2*ops)
	}
	return physics.Cost{Bytes: bytes, Flops: search + accumulate + svd + sym}
}
