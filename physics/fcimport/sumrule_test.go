package fcimport

import (
	"fmt"
	"maps"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// imposeSumRuleWhole is the sum-rule correction solved as one 9n×9n
// system by SVD (the form before the decoupling in imposeSumRule; the
// reference of TestSumRuleDecoupled): row 9s+x of n_s λ_s + Σ C_st λ_tᵀ
// = E_s, minimum-norm solution with singular values below 1e-10 of the
// largest dropped.
func imposeSumRuleWhole(t *testing.T, fc map[key][9]float64, nsites int) {
	t.Helper()
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
		t.Fatal("SVD did not converge")
	}
	vals := svd.Values(nil)
	var lam mat.Dense
	svd.SolveTo(&lam, rhs, rankAbove(vals, 1e-10*vals[0]))
	for _, k := range sortedKeys(fc) {
		b := fc[k]
		for x := 0; x < 9; x++ {
			xt := 3*(x%3) + x/3
			b[x] -= lam.At(9*k.s+x, 0) + lam.At(9*k.t+xt, 0)
		}
		fc[k] = b
	}
}

// TestSumRuleDecoupled: the decoupled solve (two n×n systems, symmetric
// and antisymmetric parts; derived in imposeSumRule) gives the corrected
// blocks of the whole 9n×9n system's minimum-norm solution, to rounding,
// on random permutation-symmetric sets of 1 to 12 sites (blocks with
// random cell offsets, elements uniform in ±1 eV/Å², so every row's
// residual is of order 1), and leaves every row summing to zero.
func TestSumRuleDecoupled(t *testing.T) {
	rng := rand.New(rand.NewPCG(16, 9))
	for trial := range 60 {
		nsites := 1 + trial%12
		fc := randomSet(rng, nsites)
		whole := map[key][9]float64{}
		for k, b := range fc {
			whole[k] = b
		}
		if err := imposeSumRule(fc, nsites); err != nil {
			t.Fatal(err)
		}
		imposeSumRuleWhole(t, whole, nsites)
		worst := 0.0
		for k, b := range fc {
			for x := range b {
				worst = math.Max(worst, math.Abs(b[x]-whole[k][x]))
			}
		}
		if worst > 1e-12 {
			t.Errorf("trial %d (%d sites, %d blocks): decoupled and whole solutions differ by %.3g eV/Å²", trial, nsites, len(fc), worst)
		}
		if v := sumRuleViolation(fc, nsites); v > 1e-12 {
			t.Errorf("trial %d: sum rule %.3g after the correction", trial, v)
		}
	}
}

// randomSet is a random permutation-symmetric folded set of nsites sites
// with about 4·nsites pairs and every on-site block (TestSumRuleDecoupled's
// sets, for the benchmark).
func randomSet(rng *rand.Rand, nsites int) map[key][9]float64 {
	fc := map[key][9]float64{}
	for range 4 * nsites {
		s, u := rng.IntN(nsites), rng.IntN(nsites)
		r := [3]int{rng.IntN(5) - 2, rng.IntN(5) - 2, rng.IntN(3) - 1}
		var b [9]float64
		for x := range b {
			b[x] = 2*rng.Float64() - 1
		}
		fc[key{s, u, r}] = b
		fc[key{u, s, neg(r)}] = transpose(b)
	}
	for s := range nsites {
		k := key{s, s, [3]int{}}
		b := fc[k]
		p := transpose(b)
		for x := range b {
			b[x] = (b[x] + p[x]) / 2
		}
		fc[k] = b
	}
	return fc
}

// BenchmarkSumRule: the sum-rule correction of a random set of n sites,
// decoupled (two n×n SVDs, what the fold does) and whole (one 9n×9n SVD,
// the form before; only up to 128 sites, 1152×1152).
func BenchmarkSumRule(b *testing.B) {
	for _, n := range []int{16, 64, 128, 200} {
		set := randomSet(rand.New(rand.NewPCG(uint64(n), 1)), n)
		for _, whole := range []bool{false, true} {
			if whole && n > 128 {
				continue
			}
			name := "decoupled"
			if whole {
				name = "whole"
			}
			b.Run(fmt.Sprintf("sites=%d/%s", n, name), func(b *testing.B) {
				t := &testing.T{}
				for b.Loop() {
					fc := maps.Clone(set)
					if whole {
						imposeSumRuleWhole(t, fc, n)
					} else if err := imposeSumRule(fc, n); err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}
