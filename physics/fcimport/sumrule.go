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
// n_s λ_s + Σ_t C_st λ_tᵀ = E_s (E_s the row residual, n_s the row's
// block count, C_st the blocks of row s with partner t, so Σ_t C_st = n_s).
//
// The 9n unknowns decouple (derived here): with λ = S + K, S symmetric and
// K antisymmetric, λᵀ = S − K, so the symmetric part of the equations is
// (diag(n) + C) S = E^sym and the antisymmetric part (diag(n) − C) K =
// E^anti, one n×n matrix for the six independent elements of S and one for
// the three of K. Splitting each 3×3 into its symmetric and antisymmetric
// parts is an orthogonal change of basis (up to the √2 of the off-diagonal
// pairs), under which the 9n×9n system is block-diagonal with those two
// matrices; so the minimum-norm (pseudo-inverse) solution of the whole is
// that of each block, with the same rank threshold (TestSumRuleDecoupled
// checks it against the whole system). The antisymmetric matrix is
// singular along a common K (n_s = Σ_t C_st), which changes no block, and
// is solved by the SVD pseudo-inverse like the other. Work: two n×n SVDs,
// 9³ = 729 times less than one of the whole system.
func imposeSumRule(fc map[key][9]float64, nsites int) error {
	if len(fc) == 0 {
		return nil
	}
	e := residuals(fc, nsites)
	keys := sortedKeys(fc)
	n := nsites
	plus, minus := mat.NewDense(n, n, nil), mat.NewDense(n, n, nil)
	for _, k := range keys {
		plus.Set(k.s, k.s, plus.At(k.s, k.s)+1)
		minus.Set(k.s, k.s, minus.At(k.s, k.s)+1)
		plus.Set(k.s, k.t, plus.At(k.s, k.t)+1)
		minus.Set(k.s, k.t, minus.At(k.s, k.t)-1)
	}
	sym, anti := mat.NewDense(n, len(symPairs), nil), mat.NewDense(n, len(antiPairs), nil)
	for s := range e {
		for c, p := range symPairs {
			sym.Set(s, c, (e[s][p[0]]+e[s][p[1]])/2)
		}
		for c, p := range antiPairs {
			anti.Set(s, c, (e[s][p[0]]-e[s][p[1]])/2)
		}
	}
	var svdPlus, svdMinus mat.SVD
	if !svdPlus.Factorize(plus, mat.SVDThin) || !svdMinus.Factorize(minus, mat.SVDThin) {
		return fmt.Errorf("fcimport: sum-rule correction: SVD did not converge")
	}
	vp, vm := svdPlus.Values(nil), svdMinus.Values(nil)
	cut := 1e-10 * max(vp[0], vm[0])
	xs, xa := pseudoSolve(&svdPlus, sym, rankAbove(vp, cut)), pseudoSolve(&svdMinus, anti, rankAbove(vm, cut))
	lam := make([][9]float64, n)
	for s := range lam {
		for c, p := range symPairs {
			lam[s][p[0]] += xs.At(s, c)
			if p[1] != p[0] {
				lam[s][p[1]] += xs.At(s, c)
			}
		}
		for c, p := range antiPairs {
			lam[s][p[0]] += xa.At(s, c)
			lam[s][p[1]] -= xa.At(s, c)
		}
	}
	for _, k := range keys {
		b := fc[k]
		for x := 0; x < 9; x++ {
			xt := 3*(x%3) + x/3
			b[x] -= lam[k.s][x] + lam[k.t][xt]
		}
		fc[k] = b
	}
	return nil
}

// symPairs are the elements (row-major indices into a 3×3) ab and ba of the
// six independent elements of a symmetric matrix, a ≤ b; antiPairs the
// three of an antisymmetric one, a < b.
var (
	symPairs  = [6][2]int{{0, 0}, {4, 4}, {8, 8}, {1, 3}, {2, 6}, {5, 7}}
	antiPairs = [3][2]int{{1, 3}, {2, 6}, {5, 7}}
)

// pseudoSolve is the minimum-norm least-squares solution of A X = B from
// A's SVD keeping rank singular values (all zero when rank is 0: A is
// zero, as the antisymmetric matrix of a one-site crystal is).
func pseudoSolve(svd *mat.SVD, b *mat.Dense, rank int) *mat.Dense {
	r, c := b.Dims()
	x := mat.NewDense(r, c, nil)
	if rank > 0 {
		svd.SolveTo(x, b, rank)
	}
	return x
}

// rankAbove counts the singular values (descending) above cut.
func rankAbove(vals []float64, cut float64) int {
	r := 0
	for _, v := range vals {
		if v > cut {
			r++
		}
	}
	return r
}
