// The symmetry search as it was before site bins and early rejection:
// every site against every site, every candidate tested on whole dynamical
// matrices. Kept with the tests as the reference the faster search must
// reproduce exactly (TestSymmetrySearchMatchesReference) and as the
// "before" of BenchmarkSymmetrySearch.

package physics

import (
	"context"
	"math"
	"math/cmplx"
	"math/rand/v2"

	"github.com/materials-lab/modegrid/physics/lattice"
)

// SymmetryReference is SymmetryAt by the direct search.
func (m *Model) SymmetryReference(ctx context.Context, tolA float64) ([]SymOp, error) {
	return m.symmetryReference(ctx, tolA)
}

// symmetryReference finds the operations as SymmetryAt does, by the
// direct search.
func (m *Model) symmetryReference(ctx context.Context, tolA float64) ([]SymOp, error) {
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
	fcTol := m.fcTol(tolA, dmax)
	var ops []SymOp
	for _, r := range lattice.PointGroup(m.lattice, d, tolA) {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		cart := m.cartesianRotation(r)
		if !m.keepsPolarizations(cart, tolA) {
			continue
		}
		// One translation per rotation suffices for q-space use: the
		// first candidate that leaves the model invariant.
		err := m.siteMappingsRef(ctx, r, cart, tolA, func(op SymOp) (bool, error) {
			ok, err := m.fcInvariantRef(ctx, op, probes, dq, fcTol)
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

// siteMappingsRef passes to try, in order, the candidate operations (R, t)
// that map every site onto a site of the same mass, t running over
// x_j − R x_0, until try returns true or an error. Candidates are built
// one at a time (each costs O(sites²)), so a rotation whose first
// candidate holds costs one, not sites, of them. It polls ctx per
// candidate translation.
func (m *Model) siteMappingsRef(ctx context.Context, r [3][3]int, cart [3][3]float64, tolA float64, try func(SymOp) (bool, error)) error {
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
				if lattice.Norm(m.cart(diff[:d])) < tolA {
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

// rotateDRef computes U D(q) U† for the operation: the block of sites
// (π i, π j) is C D_ij Cᵀ · exp(−2πi q'·(L_i − L_j)), q' = QRot q, using
// only the p×p part of C. It polls ctx once per row of sites and returns
// nil when ctx ended.
func (m *Model) rotateDRef(ctx context.Context, op *SymOp, q [3]float64, dm []complex128) []complex128 {
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

// fcInvariantRef reports D(Sq) = U D(q) U† at the probes, within tol (see
// fcTol); it returns ctx.Err() when ctx ends first.
func (m *Model) fcInvariantRef(ctx context.Context, op SymOp, probes [][3]float64, dq [][]complex128, tol float64) (bool, error) {
	for k, q := range probes {
		want := m.rotateDRef(ctx, &op, q, dq[k])
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
