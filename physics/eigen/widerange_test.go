// Tests on matrices whose elements span the whole float64 range, denormals
// included: the dynamical matrices of models that mix force constants
// hundreds of orders of magnitude apart.

package eigen

import (
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"
)

// wideRangeHermitian returns a random n×n Hermitian matrix (full storage)
// whose elements have magnitudes 10^u·top, u uniform in [−330, 0] (so many
// are denormal or flush to 0), about a third of them exactly 0, one
// diagonal element of magnitude top so that top is the scale.
func wideRangeHermitian(rng *rand.Rand, n int, top float64) []complex128 {
	h := make([]complex128, n*n)
	for i := 0; i < n; i++ {
		for j := 0; j <= i; j++ {
			if rng.IntN(3) == 0 {
				continue
			}
			mag := top * math.Pow(10, -330*rng.Float64())
			re, im := mag*(2*rng.Float64()-1), 0.0
			if i != j && rng.IntN(2) == 0 {
				im = mag * (2*rng.Float64() - 1)
			}
			h[i*n+j] = complex(re, im)
			h[j*n+i] = complex(re, -im)
		}
	}
	d := rng.IntN(n)
	h[d*n+d] = complex(top, 0)
	return h
}

// residualCheck verifies H x_k = λ_k x_k to tol·scale and xᴴx = I to tol,
// scale being the largest |element| of H (checkEigenpairs scales by the
// largest eigenvalue, which is that element's size here).
func residualCheck(t *testing.T, what string, h []complex128, n int, vals []float64, vecs []complex128, tol, scale float64) {
	t.Helper()
	for k := 0; k < n; k++ {
		x := vecs[k*n : (k+1)*n]
		for r := 0; r < n; r++ {
			var s complex128
			for c := 0; c < n; c++ {
				s += h[r*n+c] * x[c]
			}
			if res := cmplx.Abs(s - complex(vals[k], 0)*x[r]); !(res <= tol*scale) {
				t.Fatalf("%s: mode %d row %d: residual %.3g > %.3g\nH = %v", what, k, r, res, tol*scale, h)
			}
		}
		for l := 0; l <= k; l++ {
			var dot complex128
			for c := 0; c < n; c++ {
				dot += cmplx.Conj(vecs[l*n+c]) * x[c]
			}
			want := 0.0
			if k == l {
				want = 1
			}
			if !(cmplx.Abs(dot-complex(want, 0)) <= tol) {
				t.Fatalf("%s: <x%d|x%d> = %v; want %v\nH = %v", what, l, k, dot, want, h)
			}
		}
	}
}

// TestEigenWideRange: on matrices whose elements span 10^0…10^−330 of the
// largest, the solver converges (before the reflector's column rescaling,
// squares under 2⁻¹⁰⁷⁴ made β = 0 and τ infinite: NoConverge on a finite
// matrix in a quarter of these), the embedding neither panics nor returns
// 1e121 (gonum's tridiagonal QL on a block of tiny norm; see embed), and
// the two agree to 1e-12 of the largest eigenvalue with eigenpairs whose
// residuals are below 1e-12 of it (definition of an eigendecomposition;
// common practice). Overall scales from 1 down to 1e-250 take the solver
// through its power-of-two scaling too (skipped within 2^±200).
func TestEigenWideRange(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 8))
	for trial := 0; trial < 3000; trial++ {
		n := 2 + rng.IntN(7)
		top := math.Pow(10, -250*rng.Float64())
		h := wideRangeHermitian(rng, n, top)
		want, wantVecs := embeddedNoPanic(t, h, n)
		for _, vectors := range []bool{false, true} {
			w := NewWork(n)
			copy(w.a, h)
			if st := w.Solve(vectors); st != OK {
				t.Fatalf("vectors=%v: status %v on a finite matrix\nH = %v", vectors, st, h)
			}
			for k := range want {
				if d := math.Abs(w.vals[k] - want[k]); !(d <= 1e-12*top) {
					t.Fatalf("vectors=%v: λ%d = %.17g; embedding %.17g (|Δ|/max = %.2g)\nH = %v", vectors, k, w.vals[k], want[k], d/top, h)
				}
			}
			if vectors {
				residualCheck(t, "Solve", h, n, w.vals, w.vecs, 1e-12, top)
			}
		}
		residualCheck(t, "Embedded", h, n, want, wantVecs, 1e-12, top)
	}
}

// embeddedNoPanic returns Embedded's values (asked without vectors, the
// path that panicked) and its eigenpairs, failing the test on a panic.
func embeddedNoPanic(t *testing.T, h []complex128, n int) (vals []float64, vecs []complex128) {
	t.Helper()
	defer func() {
		if p := recover(); p != nil {
			t.Fatalf("Embedded panicked: %v\nH = %v", p, h)
		}
	}()
	vals, _ = Embedded(h, n, false)
	withVecs, vecs := Embedded(h, n, true)
	for k := range vals {
		if math.Abs(vals[k]-withVecs[k]) > 1e-12*maxAbs(vals) {
			t.Fatalf("Embedded: λ%d = %v without vectors, %v with", k, vals[k], withVecs[k])
		}
	}
	return vals, vecs
}

// TestEigenFoundMatrices are matrices that once failed, each kept as found.
func TestEigenFoundMatrices(t *testing.T) {
	cases := []struct {
		name string
		h    []complex128
		want []float64 // eigenvalues, ascending; checked to 1e-12 of the largest
	}{
		{
			// The third column below the sub-diagonal is empty and the
			// sub-diagonal element ~6e-247 squares to 0: β was 0, τ
			// infinite, QL NoConverge. The off-diagonal elements are far
			// below ε of the diagonal, so the eigenvalues are the diagonal
			// (Weyl's inequality, Golub & Van Loan §8.1.2).
			name: "sub-diagonal squares underflow",
			h: []complex128{
				0, -2.3441616596364563e-117 + 3.061494463872988e-120i, 0,
				-2.3441616596364563e-117 - 3.061494463872988e-120i, -1.3262657843054763e-94, 6.488963325173122e-247,
				0, 6.488963325173122e-247, -3.1017219988860327e-17,
			},
			want: []float64{-3.1017219988860327e-17, -1.3262657843054763e-94, 0},
		},
		{
			// Nearly diagonal with diagonal blocks 1e-64, 1e-130 and
			// 1e-224: gonum's Dsteqr scaled the small blocks up and later
			// ones back down by a stale flag (eigenvalues of 1e121 and
			// −4e-210); Dsterf panicked. Eigenvalues: the diagonal, as above.
			name: "blocks 160 orders apart",
			h: []complex128{
				2.1160134573554414e-64, 1.0102315414844607e-279 - 4.3361681072183246e-280i, 0,
				1.0102315414844607e-279 + 4.3361681072183246e-280i, 1.3606650276906067e-224, -3.912869632659433e-249,
				0, -3.912869632659433e-249, 4.738597770087285e-130,
			},
			want: []float64{1.3606650276906067e-224, 4.738597770087285e-130, 2.1160134573554414e-64},
		},
		{
			// The largest element is a denormal: the embedding's scale
			// 2^1070 overflowed to +Inf (NaN results). Eigenvalues of
			// [[a, b], [b, a]]: a ± b, here exact in float64.
			name: "denormal largest element",
			h:    []complex128{4e-320, 1e-320, 1e-320, 4e-320},
			want: []float64{3e-320, 5e-320},
		},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			n := len(c.want)
			emb, _ := embeddedNoPanic(t, c.h, n)
			got, _ := Hermitian(c.h, n, false)
			tol := 1e-12 * maxAbs(c.want)
			for k, want := range c.want {
				if !(math.Abs(emb[k]-want) <= tol) {
					t.Errorf("Embedded λ%d = %.17g; want %.17g", k, emb[k], want)
				}
				if c.name == "denormal largest element" {
					continue // the solver takes a matrix below 2⁻⁹⁰⁰ as 0
				}
				if !(math.Abs(got[k]-want) <= tol) {
					t.Errorf("Hermitian λ%d = %.17g; want %.17g", k, got[k], want)
				}
			}
		})
	}
}

// TestEmbeddedNonFinite: a NaN or infinite element gives NaN results from
// the embedding, not a panic or numbers.
func TestEmbeddedNonFinite(t *testing.T) {
	for _, bad := range []complex128{cmplx.NaN(), cmplx.Inf(), complex(1, math.Inf(-1))} {
		h := []complex128{1, 0, bad, 2}
		h[1] = cmplx.Conj(bad)
		vals, vecs := Embedded(h, 2, true)
		for k := range vals {
			if !math.IsNaN(vals[k]) {
				t.Errorf("element %v: λ%d = %v; want NaN", bad, k, vals[k])
			}
		}
		for k := range vecs {
			if !cmplx.IsNaN(vecs[k]) {
				t.Errorf("element %v: vector component %d = %v; want NaN", bad, k, vecs[k])
			}
		}
	}
}
