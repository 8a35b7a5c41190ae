package fcimport

import (
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// imposeSumRule makes Σ_{t,R} Φ(s,0;t,R) = 0 for every site s while
// keeping Φ(s,0;t,R) = Φ(t,0;s,−R)ᵀ, by the smallest change in the least-
// squares sense: the sum of ‖δΦ‖²_F over every block of the folded set
// (each ordered pair (s,t,R) counted, zero blocks of supercell pairs
// included). Lagrange multipliers Λ_s for the row constraints give, for a
// pair and its transposed partner alike (derived here; spreading the
// residual over the row rather than onto the on-site block alone is
// common practice),
//
//	δΦ(s,0;t,R) = −(λ_s + λ_tᵀ),
//
// which is permutation-symmetric by construction; the 3×3 λ_s solve
// n_s λ_s + Σ_{(t,R) in row s} λ_tᵀ = E_s (E_s the row residual, n_s the
// row's block count). The system is singular along a common antisymmetric
// λ, which changes no block, so it is solved by the SVD pseudo-inverse.
func imposeSumRule(fc map[key][9]float64, nsites int) error {
	if len(fc) == 0 {
		return nil
	}
	e := residuals(fc, nsites)
	n := 9 * nsites
	a := mat.NewDense(n, n, nil)
	rhs := mat.NewDense(n, 1, nil)
	for _, k := range sortedKeys(fc) {
		for x := 0; x < 9; x++ {
			xt := 3*(x%3) + x/3
			row := 9*k.s + x
			a.Set(row, row, a.At(row, row)+1)
			col := 9*k.t + xt
			a.Set(row, col, a.At(row, col)+1)
		}
	}
	for s := range e {
		for x := 0; x < 9; x++ {
			rhs.Set(9*s+x, 0, e[s][x])
		}
	}
	var svd mat.SVD
	if !svd.Factorize(a, mat.SVDThin) {
		return fmt.Errorf("fcimport: sum-rule correction: SVD did not converge")
	}
	vals := svd.Values(nil)
	rank := 0
	for _, v := range vals {
		if v > 1e-10*vals[0] {
			rank++
		}
	}
	var lam mat.Dense
	svd.SolveTo(&lam, rhs, rank)
	for _, k := range sortedKeys(fc) {
		b := fc[k]
		for x := 0; x < 9; x++ {
			xt := 3*(x%3) + x/3
			b[x] -= lam.At(9*k.s+x, 0) + lam.At(9*k.t+xt, 0)
		}
		fc[k] = b
	}
	return nil
}
