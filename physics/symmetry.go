package physics

import (
	"context"
	"math"
	"math/cmplx"
	"math/rand/v2"

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
const (
	// SymPosTolA is the Cartesian distance (Å) within which a transformed
	// site must land on a site of the same mass.
	SymPosTolA = 1e-5
	// SymFCTol is the tolerance, relative to the largest element of D, for
	// D(Sq) = U D(q) U† to hold.
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
// The search costs O(sites³) per candidate rotation plus a few dynamical
// matrices (tens of seconds at 512 sites); it polls ctx and returns
// ctx.Err() when ctx ends first. A cancelled search keeps nothing: the
// next call searches again.
func (m *Model) Symmetry(ctx context.Context) ([]SymOp, error) {
	return m.sym.get(ctx, m.findSymmetry)
}

func (m *Model) findSymmetry(ctx context.Context) ([]SymOp, error) {
	d := m.dim
	rng := rand.New(rand.NewPCG(0x5eed, 0x0dd5))
	var probes [][3]float64
	for k := 0; k < 3; k++ {
		var q [3]float64
		for a := 0; a < d; a++ {
			q[a] = rng.Float64() - 0.5
		}
		probes = append(probes, q)
	}
	dq := make([][]complex128, len(probes))
	for k, q := range probes {
		var err error
		if dq[k], err = m.dynamicalMatrixCtx(ctx, q); err != nil {
			return nil, err
		}
	}
	var dmax float64
	for _, dm := range dq {
		for _, z := range dm {
			dmax = math.Max(dmax, cmplx.Abs(z))
		}
	}
	var ops []SymOp
	for _, r := range lattice.PointGroup(m.lattice, d) {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		cart := m.cartesianRotation(r)
		if !m.keepsPolarizations(cart) {
			continue
		}
		// One translation per rotation suffices for q-space use: the
		// first candidate that leaves the model invariant.
		err := m.siteMappings(ctx, r, cart, func(op SymOp) (bool, error) {
			ok, err := m.fcInvariant(ctx, op, probes, dq, dmax)
			if ok {
				ops = append(ops, op)
			}
			return ok, err
		})
		if err != nil {
			return nil, err
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
// axes (the ones atoms move along) with the others.
func (m *Model) keepsPolarizations(c [3][3]float64) bool {
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			if (a < m.p) != (b < m.p) && math.Abs(c[a][b]) > 1e-8 {
				return false
			}
		}
	}
	return true
}

// siteMappings passes to try, in order, the candidate operations (R, t)
// that map every site onto a site of the same mass, t running over
// x_j − R x_0, until try returns true or an error. Candidates are built
// one at a time (each costs O(sites²)), so a rotation whose first
// candidate holds costs one, not sites, of them. It polls ctx per
// candidate translation.
func (m *Model) siteMappings(ctx context.Context, r [3][3]int, cart [3][3]float64, try func(SymOp) (bool, error)) error {
	d, ns := m.dim, m.nsites
	rx := make([][3]float64, ns)
	for i := 0; i < ns; i++ {
		for a := 0; a < d; a++ {
			for b := 0; b < d; b++ {
				rx[i][a] += float64(r[a][b]) * m.frac[i][b]
			}
		}
	}
	for j0 := 0; j0 < ns; j0++ {
		if m.massAmu[j0] != m.massAmu[0] {
			continue
		}
		if err := ctx.Err(); err != nil {
			return err
		}
		var t [3]float64
		for a := 0; a < d; a++ {
			t[a] = m.frac[j0][a] - rx[0][a]
			t[a] -= math.Floor(t[a])
		}
		perm := make([]int, ns)
		shift := make([][3]int, ns)
		used := make([]bool, ns)
		ok := true
		for i := 0; i < ns && ok; i++ {
			found := false
			for j := 0; j < ns; j++ {
				if used[j] || m.massAmu[j] != m.massAmu[i] {
					continue
				}
				var diff, cell [3]float64
				for a := 0; a < d; a++ {
					diff[a] = rx[i][a] + t[a] - m.frac[j][a]
					cell[a] = math.Round(diff[a])
					diff[a] -= cell[a]
				}
				if lattice.Norm(m.cart(diff[:d])) < SymPosTolA {
					perm[i], used[j], found = j, true, true
					for a := 0; a < d; a++ {
						shift[i][a] = int(cell[a])
					}
					break
				}
			}
			ok = found
		}
		if !ok {
			continue
		}
		op := SymOp{Rot: r, Trans: t, Cart: cart, Perm: perm, Shift: shift, QRot: lattice.InvTransposeInt(r)}
		if done, err := try(op); done || err != nil {
			return err
		}
	}
	return nil
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

// rotateD computes U D(q) U† for the operation: the block of sites
// (π i, π j) is C D_ij Cᵀ · exp(−2πi q'·(L_i − L_j)), q' = QRot q, using
// only the p×p part of C. It polls ctx once per row of sites and returns
// nil when ctx ended.
func (m *Model) rotateD(ctx context.Context, op *SymOp, q [3]float64, dm []complex128) []complex128 {
	p, nm := m.p, m.ModeCount()
	qp := op.applyQ(q)
	ph := make([]complex128, m.nsites)
	for i := range ph {
		var arg float64
		for a := 0; a < 3; a++ {
			arg += qp[a] * float64(op.Shift[i][a])
		}
		ph[i] = cmplx.Rect(1, -2*math.Pi*arg)
	}
	out := make([]complex128, nm*nm)
	for i := 0; i < m.nsites; i++ {
		if ctx.Err() != nil {
			return nil
		}
		for j := 0; j < m.nsites; j++ {
			f := ph[i] * cmplx.Conj(ph[j])
			pi, pj := op.Perm[i], op.Perm[j]
			for a := 0; a < p; a++ {
				for b := 0; b < p; b++ {
					var s complex128
					for c := 0; c < p; c++ {
						for e := 0; e < p; e++ {
							s += complex(op.Cart[a][c]*op.Cart[b][e], 0) * dm[(i*p+c)*nm+j*p+e]
						}
					}
					out[(pi*p+a)*nm+pj*p+b] = s * f
				}
			}
		}
	}
	return out
}

// fcInvariant reports D(Sq) = U D(q) U† at the probes, within SymFCTol of
// the largest element; it returns ctx.Err() when ctx ends first.
func (m *Model) fcInvariant(ctx context.Context, op SymOp, probes [][3]float64, dq [][]complex128, dmax float64) (bool, error) {
	tol := SymFCTol*dmax + 1e-14
	for k, q := range probes {
		want := m.rotateD(ctx, &op, q, dq[k])
		if want == nil {
			return false, ctx.Err()
		}
		got, err := m.dynamicalMatrixCtx(ctx, op.applyQ(q))
		if err != nil {
			return false, err
		}
		for x := range got {
			if cmplx.Abs(got[x]-want[x]) > tol {
				return false, nil
			}
		}
	}
	return true, nil
}
