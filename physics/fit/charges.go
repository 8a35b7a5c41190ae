// Born effective charges as free parameters: the dipole–dipole term as a
// quadratic form in the charges, built once from models with charges only.

package fit

import (
	"context"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
)

// The dipole–dipole term of physics/polar is bilinear in the charges:
// every piece of it — the real-space and reciprocal Ewald sums, the self
// term, the non-analytic term and the acoustic-sum-rule correction (a row
// sum at q = 0, split into a symmetric diagonal part and constant blocks
// linear in the row sums) — has the form Σ Z_s[γα] K_st[γδ](q) Z_t[δβ]
// /√(m_s m_t) with a kernel K that depends on the geometry, ε∞ and the
// Ewald parameter only (the cut-offs and Λ are chosen from the cell and
// ε∞, never from the charges). With charge neutrality enforced, the
// charges used are P(Z) = Z − mean(Z), linear in Z, so the term stays
// bilinear in the charges as given. Write M(Z) for the D(q) of the model
// with every force constant 0 and charges Z (the term alone, the short
// range being linear in force constants that are all 0) and B(Z, Z') for
// its symmetric bilinear form, M(Z) = B(Z, Z).
//
// The charges at parameter vector x are Z(x) = Z₀ + Σ_a x_a E_a: Z₀ the
// starting charges with the free ones (and their ties) at 0, E_a the
// members of charge parameter a at their factors. Then
//
//	M(Z(x)) = M(Z₀) + Σ_a x_a·2B(Z₀, E_a) + Σ_a x_a² B(E_a, E_a) + Σ_{a<b} 2x_a x_b B(E_a, E_b),
//
// exactly, and ∂D/∂x_a = 2B(Z₀, E_a) + 2Σ_b x_b B(E_a, E_b): an analytic
// derivative, linear in x. The matrices B come from compiled models by
// the polarisation identity of a symmetric bilinear form, B(U, V) =
// [M(U + V) − M(U − V)]/4, which holds exactly for a quadratic M (it is
// not a finite difference: no step size enters, and any scale of U and V
// gives the same B to rounding). The scales are chosen to keep every
// model's charges within ±2 e: sZ₀ and hE_a with s = 1/max(1, max|Z₀|)
// and h_a = 1/max|factor of a|, and B(Z₀, E_a) = [M(sZ₀ + h_aE_a) −
// M(sZ₀ − h_aE_a)]/(4 s h_a).

// term is one model's D(q) with a coefficient.
type term struct {
	m *physics.Model
	c float64
}

// pair is a product x_a x_b of two charge parameters (a ≤ b, parameter
// indices) in the quadratic part.
type pair struct{ a, b int }

// chargeBasis is the dipole–dipole term's dependence on the free charges.
// M(Z₀) is part of the zero model (compiled with the charges Z₀).
type chargeBasis struct {
	lin   map[int][]term // per charge parameter: 2B(Z₀, E_a) as a combination of models
	pairs []pair
	quad  [][]term // per pair: B(E_a, E_b)
	tol   map[int]float64
}

// chargeVector is a set of Born charges, one [9] per site.
type chargeVector [][9]float64

// chargesOf returns the charges of c.
func chargesOf(c *physics.Crystal) chargeVector {
	out := make(chargeVector, len(c.Sites))
	for i, s := range c.Sites {
		copy(out[i][:], s.BornCharge)
	}
	return out
}

// axpby returns a·u + b·v (v may be nil: a·u).
func axpby(a float64, u chargeVector, b float64, v chargeVector) chargeVector {
	out := make(chargeVector, len(u))
	for i := range u {
		for k := range u[i] {
			out[i][k] = a * u[i][k]
			if v != nil {
				out[i][k] += b * v[i][k]
			}
		}
	}
	return out
}

// maxAbs is the largest |element| of z.
func (z chargeVector) maxAbs() float64 {
	m := 0.0
	for _, s := range z {
		for _, x := range s {
			m = math.Max(m, math.Abs(x))
		}
	}
	return m
}

// newChargeBasis compiles the charge models of the charge parameters of
// params (nil when there are none). zero is the crystal of the zero
// model (free parameters at 0), start the problem's crystal.
func (ev *evaluator) newChargeBasis(ctx context.Context, start, zero *physics.Crystal, params []param) (*chargeBasis, error) {
	var idx []int
	for j, pr := range params {
		if pr.members[0].path.isCharge() {
			idx = append(idx, j)
		}
	}
	if len(idx) == 0 {
		return nil, nil
	}
	skel := zeroForces(start)
	model := func(z chargeVector) (*physics.Model, error) {
		for i := range skel.Sites {
			skel.Sites[i].BornCharge = append([]float64(nil), z[i][:]...)
		}
		return ev.compile(ctx, skel)
	}
	z0 := chargesOf(zero)
	s := 1 / math.Max(1, z0.maxAbs())
	e := make(map[int]chargeVector, len(idx))
	h := make(map[int]float64, len(idx))
	for _, j := range idx {
		ej := make(chargeVector, len(start.Sites))
		big := 0.0
		for _, m := range params[j].members {
			ej[m.path.i][m.path.k] = m.factor
			big = math.Max(big, math.Abs(m.factor))
		}
		e[j], h[j] = ej, 1/big
	}
	cb := &chargeBasis{lin: map[int][]term{}, tol: map[int]float64{}}
	for x, a := range idx {
		if z0.maxAbs() > 0 {
			mp, err1 := model(axpby(s, z0, h[a], e[a]))
			mm, err2 := model(axpby(s, z0, -h[a], e[a]))
			if err := firstErr(err1, err2); err != nil {
				return nil, fmt.Errorf("fit: the charge model of %s: %w", params[a].name, err)
			}
			c := 1 / (2 * s * h[a])
			cb.lin[a] = []term{{mp, c}, {mm, -c}}
		}
		for _, b := range idx[x:] {
			var t []term
			if a == b {
				m, err := model(axpby(h[a], e[a], 0, nil))
				if err != nil {
					return nil, fmt.Errorf("fit: the charge model of %s: %w", params[a].name, err)
				}
				t = []term{{m, 1 / (h[a] * h[a])}}
				cb.tol[a] = m.EigenTol()
			} else {
				mp, err1 := model(axpby(h[a], e[a], h[b], e[b]))
				mm, err2 := model(axpby(h[a], e[a], -h[b], e[b]))
				if err := firstErr(err1, err2); err != nil {
					return nil, fmt.Errorf("fit: the charge models of %s and %s: %w", params[a].name, params[b].name, err)
				}
				c := 1 / (4 * h[a] * h[b])
				t = []term{{mp, c}, {mm, -c}}
			}
			cb.pairs = append(cb.pairs, pair{a, b})
			cb.quad = append(cb.quad, t)
		}
		cb.tol[a] /= h[a] * h[a] // the tolerance of the term at unit charge scale
	}
	return cb, nil
}

func firstErr(errs ...error) error {
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

// assemble writes Σ c·D_m(q) of ts into out (allocating when short; zero
// when ts is empty), using tmp as scratch, and returns out and tmp.
func assemble(ts []term, q [3]float64, n int, out, tmp []complex128) ([]complex128, []complex128) {
	if cap(out) < n*n {
		out = make([]complex128, n*n)
	}
	out = out[:n*n]
	clear(out)
	for _, t := range ts {
		tmp = t.m.DynamicalMatrix(q, tmp)
		c := complex(t.c, 0)
		for k, v := range tmp {
			out[k] += c * v
		}
	}
	return out, tmp
}

// ChargeModels is the number of models compiled for nc charge parameters
// (for the cost estimate): two per parameter for its linear part, one per
// parameter and two per pair of parameters for the quadratic part.
func ChargeModels(nc int) int { return 3*nc + nc*(nc-1) }
