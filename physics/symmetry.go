package physics

import (
	"context"
	"math"

	"github.com/materials-lab/modegrid/physics/lattice"
)

// SymOp is a point-group operation of a model with its fractional
// translation: a site at fractional position x goes to Rot·x + Trans.
// Rot acts on fractional (lattice) coordinates; only its top-left d×d
// block is meaningful (the rest is the identity).
type SymOp struct {
	Rot   [3][3]int     // integer lattice automorphism
	Trans [3]float64    // fractional translation, in [0, 1)
	Cart  [3][3]float64 // the same rotation in Cartesian coordinates
	// Perm[i] is the site that site i goes to; Shift[i] the cell it lands
	// in: Rot·x_i + Trans = x_{Perm[i]} + Shift[i].
	Perm  []int
	Shift [][3]int
	// QRot maps fractional q to the image wavevector: q' = QRot·q, with
	// QRot = Rot⁻ᵀ (so that q'·(Rot n) = q·n).
	QRot [3][3]int
}

// Symmetry tolerances.
//
// One length, the symmetry tolerance δ (Å, Options.SymTolA), says how far
// a model may be from exactly symmetric and still count as symmetric; the
// other tests derive their tolerances from it:
//
//   - sites: a transformed site must land within δ (Cartesian distance,
//     modulo the lattice) of a site of the same mass;
//   - metric: Rᵀ G R = G within lattice.MetricTol (the change of the
//     metric when every lattice vector moves by δ);
//   - polarizations: the Cartesian rotation may mix the moving axes with
//     the others by at most (1+d)δ/L_min (its error when the lattice
//     vectors, of shortest length L_min, move by δ);
//   - force constants: D(Sq) = U D(q) U† within fcTol (below).
//
// DefaultSymTolA is δ when none is given: 1e-4 Å. A model typed to 6
// decimals has fractional coordinates off by up to 5e-7, i.e. 5e-6 Å on
// a 10 Å lattice vector, and lattice vectors off by 5e-7 Å; a site image
// combines a few such errors (the site, the site the translation comes
// from, the rotated site), some 2e-5 Å at worst. 1e-4 Å sits five times
// above that and a hundred times below a distortion of 1e-2 Å, which is
// far smaller than the displacements that separate real structures (tenths
// of an Å) yet is kept apart. It equals ShellTolA, the tolerance that puts
// two bonds in one neighbour shell.
const (
	DefaultSymTolA = 1e-4
	// MinSymTolA and MaxSymTolA bound a given tolerance: below 1e-9 Å it
	// drowns in rounding of Å-sized coordinates; above 0.1 Å it would
	// merge sites that a real distortion moved apart.
	MinSymTolA = 1e-9
	MaxSymTolA = 0.1
	// SymFCTol is the rounding allowance, relative to the largest element
	// of D, for D(Sq) = U D(q) U† to hold in an exactly symmetric model.
	SymFCTol = 1e-9
)

// Symmetry returns the model's point-group operations (with fractional
// translations): the integer lattice automorphisms with entries in
// {−1, 0, 1} — enough for a reduced basis — that preserve the metric, keep
// the first p Cartesian axes apart from the others, map every site onto a
// site of the same mass, and leave the whole force-constant model
// invariant. Invariance is checked on the dynamical matrix itself,
// D(Sq) = U D(q) U†, at three random incommensurate q-points; D is a
// trigonometric polynomial in q, so a broken symmetry cannot pass by
// accident (any interaction that breaks a symmetry removes the operation).
// The identity is always first. The result is computed once per model.
// Time reversal (q → −q) is not listed: it always holds.
//
// Candidates are the lattice's point group (lattice.PointGroup) and, per
// rotation, the translations taking site 0 onto each site of its mass;
// sites are matched through a grid of fractional positions (O(sites) per
// candidate), a candidate is rejected from one block row of D when it
// certainly fails and accepted from its force constants when it
// certainly holds, and only the rest are compared on whole matrices
// (symsearch.go). It polls ctx and returns ctx.Err() when ctx ends first.
// A cancelled search keeps nothing: the next call searches again.
//
// Operations are found within the model's symmetry tolerance (SymTolA): a
// model within it of a symmetric one gets that one's operations, and the
// results that use them (grid reduction, unfolding) are those of the
// symmetric model up to errors of the order of the tolerance; Symmetrize
// makes the model exactly symmetric.
func (m *Model) Symmetry(ctx context.Context) ([]SymOp, error) {
	return m.sym.get(ctx, func(ctx context.Context) ([]SymOp, error) {
		return m.SymmetryAt(ctx, m.symTolA)
	})
}

// SymTolA returns the symmetry tolerance of the model, Å.
func (m *Model) SymTolA() float64 { return m.symTolA }

// SymmetryAt finds the operations as Symmetry does, but within the
// symmetry tolerance tolA (Å) instead of the model's, and keeps nothing:
// it is for comparing tolerances (how many operations a looser one would
// find). tolA must be positive.
func (m *Model) SymmetryAt(ctx context.Context, tolA float64) ([]SymOp, error) {
	s, err := m.newSymSearch(ctx, tolA)
	if err != nil {
		return nil, err
	}
	var ops []SymOp
	for _, r := range lattice.PointGroup(m.lattice, m.dim, tolA) {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		cart := m.cartesianRotation(r)
		if !m.keepsPolarizations(cart, tolA) {
			continue
		}
		// One translation per rotation suffices for q-space use: the
		// first candidate that leaves the model invariant.
		op, ok, err := s.firstInvariant(ctx, r, cart)
		if err != nil {
			return nil, err
		}
		if ok {
			ops = append(ops, op)
		}
	}
	// Identity first.
	for i, op := range ops {
		if op.Rot == lattice.Identity() && i > 0 {
			ops[0], ops[i] = ops[i], ops[0]
		}
	}
	return ops, nil
}

// cartesianRotation is C = Σ_kl a_k R_kl b_lᵀ/2π on the lattice span plus
// the identity on its orthogonal complement (for d < 3).
func (m *Model) cartesianRotation(r [3][3]int) [3][3]float64 {
	var c [3][3]float64
	d := m.dim
	for x := 0; x < 3; x++ {
		for y := 0; y < 3; y++ {
			var s, proj float64
			for k := 0; k < d; k++ {
				for l := 0; l < d; l++ {
					s += m.lattice[k][x] * float64(r[k][l]) * m.recip[l][y]
				}
				proj += m.lattice[k][x] * m.recip[k][y]
			}
			s /= 2 * math.Pi
			proj /= 2 * math.Pi
			if x == y {
				s += 1 - proj
			} else {
				s -= proj
			}
			c[x][y] = s
		}
	}
	return c
}

// keepsPolarizations reports that C does not mix the first p Cartesian
// axes (the ones atoms move along) with the others, within 1e-8 plus
// (1+d)·tolA/L_min: C = Σ a_k R b_kᵀ/2π moves by about that much when the
// lattice vectors (shortest L_min) move by tolA.
func (m *Model) keepsPolarizations(c [3][3]float64, tolA float64) bool {
	tol := 1e-8 + float64(1+m.dim)*tolA/m.shortestLatticeA()
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			if (a < m.p) != (b < m.p) && math.Abs(c[a][b]) > tol {
				return false
			}
		}
	}
	return true
}

// applyQ returns QRot·q.
func (op *SymOp) applyQ(q [3]float64) [3]float64 {
	var out [3]float64
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			out[a] += float64(op.QRot[a][b]) * q[b]
		}
	}
	return out
}

// fcTol is the tolerance (eV/Å²/amu) on each element of
// D(Sq) − U D(q) U† for a model within tolA (Å) of a symmetric one:
//
//	SymFCTol·dmax + (8/r_min + 2(1+d)p/L_min)·tolA·Λ
//
// with Λ the Gershgorin bound of D (the largest row sum of |Φ|/√(m_i m_j)),
// r_min the shortest bond of the model and L_min the shortest lattice
// vector. Why: a bond of length r whose ends each move by δ turns by at
// most 2δ/r, so its unit vector ê moves by 2δ/r and êêᵀ by 4δ/r, and the
// spring block k_L êêᵀ + k_T(1 − êêᵀ) by |k_L − k_T|·4δ/r; summed over a
// row of D this is at most 4δ/r_min·Λ, and both D(Sq) and U D(q) U†
// carry such an error (8). The Cartesian rotation C in U is off by up to
// (1+d)δ/L_min per entry (keepsPolarizations), and C D Cᵀ sums p terms on
// each side (2(1+d)p/L_min). Explicit blocks computed by the caller from
// positions typed to the same precision carry the same relative error, so
// they are treated alike. The first term is the rounding allowance of an
// exactly symmetric model.
func (m *Model) fcTol(tolA, dmax float64) float64 {
	rel := (8/m.shortestBondA() + 2*float64((1+m.dim)*m.p)/m.shortestLatticeA()) * tolA
	return SymFCTol*dmax + 1e-14 + rel*m.lambdaScale
}

// shortestLatticeA is the length of the shortest lattice vector given, Å.
func (m *Model) shortestLatticeA() float64 {
	l := math.Inf(1)
	for k := 0; k < m.dim; k++ {
		l = math.Min(l, lattice.Norm(m.lattice[k]))
	}
	return l
}

// shortestBondA is the length of the shortest interaction of the model
// (off-site force-constant term), Å; the shortest lattice vector when the
// model has none (its terms are all on-site, and their errors do not come
// from bond directions).
func (m *Model) shortestBondA() float64 {
	r := m.shortestLatticeA()
	for _, t := range m.terms {
		if t.i == t.j && t.n == ([3]int{}) {
			continue
		}
		v := m.pos[t.j]
		for k := 0; k < m.dim; k++ {
			for a := 0; a < 3; a++ {
				v[a] += float64(t.n[k]) * m.lattice[k][a]
			}
		}
		if l := lattice.Norm(lattice.Sub(v, m.pos[t.i])); l > 0 {
			r = math.Min(r, l)
		}
	}
	return r
}
