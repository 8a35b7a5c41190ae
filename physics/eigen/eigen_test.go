// Tests of the Hermitian eigensolver against gonum's real symmetric solver,
// and the benchmark that chose the method (see the header of eigen.go).

package eigen

import (
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"
)

// randomHermitian returns a random n×n Hermitian matrix (full storage),
// elements uniform in [−1, 1) + i[−1, 1).
func randomHermitian(rng *rand.Rand, n int) []complex128 {
	h := make([]complex128, n*n)
	for i := 0; i < n; i++ {
		h[i*n+i] = complex(2*rng.Float64()-1, 0)
		for j := 0; j < i; j++ {
			z := complex(2*rng.Float64()-1, 2*rng.Float64()-1)
			h[i*n+j] = z
			h[j*n+i] = cmplx.Conj(z)
		}
	}
	return h
}

// randomUnitary returns a random n×n unitary matrix (columns orthonormal,
// by modified Gram–Schmidt on a random complex matrix).
func randomUnitary(rng *rand.Rand, n int) []complex128 {
	u := make([]complex128, n*n)
	for k := range u {
		u[k] = complex(rng.NormFloat64(), rng.NormFloat64())
	}
	for c := 0; c < n; c++ {
		for k := 0; k < c; k++ {
			var dot complex128
			for r := 0; r < n; r++ {
				dot += cmplx.Conj(u[r*n+k]) * u[r*n+c]
			}
			for r := 0; r < n; r++ {
				u[r*n+c] -= dot * u[r*n+k]
			}
		}
		var nrm float64
		for r := 0; r < n; r++ {
			nrm += real(u[r*n+c])*real(u[r*n+c]) + imag(u[r*n+c])*imag(u[r*n+c])
		}
		for r := 0; r < n; r++ {
			u[r*n+c] /= complex(math.Sqrt(nrm), 0)
		}
	}
	return u
}

// withSpectrum returns U diag(lambda) Uᴴ for a random unitary U.
func withSpectrum(rng *rand.Rand, lambda []float64) []complex128 {
	n := len(lambda)
	u := randomUnitary(rng, n)
	h := make([]complex128, n*n)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			var s complex128
			for k := 0; k < n; k++ {
				s += u[i*n+k] * complex(lambda[k], 0) * cmplx.Conj(u[j*n+k])
			}
			h[i*n+j] = s
		}
	}
	// Exactly Hermitian.
	for i := 0; i < n; i++ {
		h[i*n+i] = complex(real(h[i*n+i]), 0)
		for j := 0; j < i; j++ {
			h[j*n+i] = cmplx.Conj(h[i*n+j])
		}
	}
	return h
}

func maxAbs(xs []float64) float64 {
	var m float64
	for _, x := range xs {
		m = math.Max(m, math.Abs(x))
	}
	return m
}

// checkEigenpairs verifies H x_k = λ_k x_k and xᴴx = I to tol·scale.
func checkEigenpairs(t *testing.T, h []complex128, n int, vals []float64, vecs []complex128, tol float64) {
	t.Helper()
	scale := math.Max(maxAbs(vals), 1e-300)
	for k := 0; k < n; k++ {
		x := vecs[k*n : (k+1)*n]
		for r := 0; r < n; r++ {
			var s complex128
			for c := 0; c < n; c++ {
				s += h[r*n+c] * x[c]
			}
			if res := cmplx.Abs(s - complex(vals[k], 0)*x[r]); res > tol*scale {
				t.Fatalf("mode %d row %d: residual %.3g > %.3g", k, r, res, tol*scale)
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
			if cmplx.Abs(dot-complex(want, 0)) > tol {
				t.Fatalf("<x%d|x%d> = %v; want %v", l, k, dot, want)
			}
		}
	}
}

// TestEigenAgainstGonum compares the Householder + QL eigenvalues with
// gonum's real symmetric solver (mat.EigenSym) applied to the 2n×2n real
// embedding of random Hermitian matrices, to 1e-12 of the largest
// eigenvalue (the project asks for 1e-10), and checks residuals and
// orthonormality of the eigenvectors (definition of an eigendecomposition;
// common practice).
func TestEigenAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 17))
	type tc struct {
		name string
		h    []complex128
		n    int
	}
	var cases []tc
	for _, n := range []int{1, 2, 3, 4, 6, 9, 12, 24, 50, 97} {
		cases = append(cases, tc{fmt.Sprintf("random n=%d", n), randomHermitian(rng, n), n})
	}
	// Degenerate spectra: eigenvectors inside a degenerate subspace are
	// arbitrary, eigenvalues are not.
	cases = append(cases,
		tc{"triple degeneracy n=6", withSpectrum(rng, []float64{0, 0, 0, 2, 2, 5}), 6},
		tc{"all equal n=8", withSpectrum(rng, []float64{3, 3, 3, 3, 3, 3, 3, 3}), 8},
		tc{"three zero modes n=12", withSpectrum(rng, []float64{0, 0, 0, 1e-3, 0.1, 0.1, 1, 2, 2, 2, 7, 9}), 12},
		tc{"wide range n=10", withSpectrum(rng, []float64{-1e-6, 1e-9, 1e-3, 1, 10, 100, 1e3, 1e4, 1e5, 1e6}), 10},
		tc{"negative n=5", withSpectrum(rng, []float64{-4, -1, 0, 1, 4}), 5},
	)
	for _, scale := range []float64{1e-150, 1e150} {
		h := randomHermitian(rng, 7)
		for k := range h {
			h[k] *= complex(scale, 0)
		}
		cases = append(cases, tc{fmt.Sprintf("scaled %g n=7", scale), h, 7})
	}
	cases = append(cases,
		tc{"zero matrix n=4", make([]complex128, 16), 4},
		tc{"diagonal n=3", []complex128{3, 0, 0, 0, -1, 0, 0, 0, 2}, 3},
		tc{"real tridiagonal n=4", []complex128{2, 1, 0, 0, 1, 2, 1, 0, 0, 1, 2, 1, 0, 0, 1, 2}, 4},
		tc{"pure imaginary off-diagonal n=2", []complex128{0, 1i, -1i, 0}, 2},
	)
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			want, _ := Embedded(c.h, c.n, false)
			got, _ := Hermitian(c.h, c.n, false)
			scale := maxAbs(want)
			for k := range want {
				if math.Abs(got[k]-want[k]) > 1e-12*scale {
					t.Fatalf("λ%d = %.17g; gonum %.17g (|Δ|/max = %.2g)", k, got[k], want[k], math.Abs(got[k]-want[k])/scale)
				}
			}
			vals, vecs := Hermitian(c.h, c.n, true)
			for k := range want {
				if math.Abs(vals[k]-want[k]) > 1e-12*scale {
					t.Fatalf("with vectors λ%d = %.17g; gonum %.17g", k, vals[k], want[k])
				}
			}
			checkEigenpairs(t, c.h, c.n, vals, vecs, 1e-12)
		})
	}
}

// TestEigenWorkReuse: one workspace solves many matrices with the same
// results as fresh ones and without allocating (the grid loops rely on it).
func TestEigenWorkReuse(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	const n = 6
	w := NewWork(n)
	mats := make([][]complex128, 8)
	for i := range mats {
		mats[i] = randomHermitian(rng, n)
	}
	for _, vectors := range []bool{false, true} {
		for _, h := range mats {
			copy(w.a, h)
			if st := w.Solve(vectors); st != OK {
				t.Fatalf("status %v", st)
			}
			want, _ := Embedded(h, n, false)
			for k := range want {
				if math.Abs(w.vals[k]-want[k]) > 1e-12*maxAbs(want) {
					t.Fatalf("reused workspace: λ%d = %v; want %v", k, w.vals[k], want[k])
				}
			}
		}
		allocs := testing.AllocsPerRun(100, func() {
			copy(w.a, mats[0])
			w.Solve(vectors)
		})
		if allocs != 0 {
			t.Errorf("vectors=%v: %v allocations per solve; want 0", vectors, allocs)
		}
	}
}

// TestEigenStops: a closed done channel stops a large solve.
func TestEigenStops(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	n := 2 * CancelCheckModes
	w := NewWork(n)
	copy(w.a, randomHermitian(rng, n))
	done := make(chan struct{})
	close(done)
	w.done = done
	if st := w.Solve(true); st != Stopped {
		t.Fatalf("status %v; want Stopped", st)
	}
}

// jacobiEigen is the cyclic complex Jacobi method, a candidate measured in
// BenchmarkHermitianEigen (not used by the engine): each rotation first
// makes h_pq real by a phase on column q, then annihilates it by a real
// plane rotation (Jacobi, J. reine angew. Math. 30, 51 (1846); Golub & Van
// Loan §8.5 for the symmetric case). Sweeps stop when the off-diagonal
// mass is below ε² of the total.
func jacobiEigen(h []complex128, n int, vectors bool) ([]float64, []complex128) {
	a := append([]complex128(nil), h[:n*n]...)
	var v []complex128
	if vectors {
		v = make([]complex128, n*n)
		for k := 0; k < n; k++ {
			v[k*n+k] = 1
		}
	}
	var total float64
	for _, z := range a {
		total += real(z)*real(z) + imag(z)*imag(z)
	}
	for sweep := 0; sweep < 60; sweep++ {
		var off float64
		for i := 0; i < n; i++ {
			for j := 0; j < i; j++ {
				z := a[i*n+j]
				off += real(z)*real(z) + imag(z)*imag(z)
			}
		}
		if off <= Epsilon*Epsilon*total {
			break
		}
		for p := 0; p < n; p++ {
			for q := p + 1; q < n; q++ {
				apq := a[p*n+q]
				r := cmplx.Abs(apq)
				if r == 0 {
					continue
				}
				ph := apq / complex(r, 0) // e^{iφ}
				// Column q times e^{−iφ}, row q times e^{iφ}: h_pq becomes r.
				phc := cmplx.Conj(ph)
				for k := 0; k < n; k++ {
					a[k*n+q] *= phc
					a[q*n+k] *= ph
				}
				a[q*n+q] = complex(real(a[q*n+q]), 0)
				zeta := (real(a[q*n+q]) - real(a[p*n+p])) / (2 * r)
				tt := 1 / (math.Abs(zeta) + math.Sqrt(zeta*zeta+1))
				if zeta < 0 {
					tt = -tt
				}
				c := 1 / math.Sqrt(1+tt*tt)
				s := tt * c
				for k := 0; k < n; k++ { // columns
					kp, kq := a[k*n+p], a[k*n+q]
					a[k*n+p] = complex(c, 0)*kp - complex(s, 0)*kq
					a[k*n+q] = complex(s, 0)*kp + complex(c, 0)*kq
				}
				for k := 0; k < n; k++ { // rows
					pk, qk := a[p*n+k], a[q*n+k]
					a[p*n+k] = complex(c, 0)*pk - complex(s, 0)*qk
					a[q*n+k] = complex(s, 0)*pk + complex(c, 0)*qk
				}
				a[p*n+q], a[q*n+p] = 0, 0
				if vectors {
					for k := 0; k < n; k++ {
						v[k*n+q] *= phc
						kp, kq := v[k*n+p], v[k*n+q]
						v[k*n+p] = complex(c, 0)*kp - complex(s, 0)*kq
						v[k*n+q] = complex(s, 0)*kp + complex(c, 0)*kq
					}
				}
			}
		}
	}
	idx := make([]int, n)
	for k := range idx {
		idx[k] = k
	}
	for i := 1; i < n; i++ {
		for j := i; j > 0 && real(a[idx[j]*n+idx[j]]) < real(a[idx[j-1]*n+idx[j-1]]); j-- {
			idx[j], idx[j-1] = idx[j-1], idx[j]
		}
	}
	vals := make([]float64, n)
	var vecs []complex128
	if vectors {
		vecs = make([]complex128, n*n)
	}
	for k, j := range idx {
		vals[k] = real(a[j*n+j])
		if vectors {
			for c := 0; c < n; c++ {
				vecs[k*n+c] = v[c*n+j]
			}
		}
	}
	return vals, vecs
}

// TestJacobiCandidate keeps the benchmarked candidate honest: it must agree
// with gonum too, or its timings would mean nothing.
func TestJacobiCandidate(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 2))
	for _, n := range []int{2, 6, 24} {
		h := randomHermitian(rng, n)
		want, _ := Embedded(h, n, false)
		vals, vecs := jacobiEigen(h, n, true)
		for k := range want {
			if math.Abs(vals[k]-want[k]) > 1e-12*maxAbs(want) {
				t.Fatalf("n=%d λ%d = %v; gonum %v", n, k, vals[k], want[k])
			}
		}
		checkEigenpairs(t, h, n, vals, vecs, 1e-11)
	}
}

var sinkVals []float64

// BenchmarkHermitianEigen measures the three candidate solvers on the same
// random Hermitian matrices: n = 3 (one site), 6 (two sites), 24 (eight) and
// 192 (sixty-four), eigenvalues only and with eigenvectors. The Householder
// case reuses its workspace as the engine does.
func BenchmarkHermitianEigen(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, n := range []int{3, 6, 24, 192} {
		h := randomHermitian(rng, n)
		for _, vectors := range []bool{false, true} {
			kind := "values"
			if vectors {
				kind = "vectors"
			}
			b.Run(fmt.Sprintf("householder-ql/%s/n=%d", kind, n), func(b *testing.B) {
				w := NewWork(n)
				b.ReportAllocs()
				for b.Loop() {
					copy(w.a, h)
					w.Solve(vectors)
				}
				sinkVals = w.vals
			})
			b.Run(fmt.Sprintf("embedding-gonum/%s/n=%d", kind, n), func(b *testing.B) {
				b.ReportAllocs()
				for b.Loop() {
					sinkVals, _ = Embedded(h, n, vectors)
				}
			})
			if n > 24 {
				continue // O(n³) per sweep: minutes at n = 192 for nothing
			}
			b.Run(fmt.Sprintf("jacobi/%s/n=%d", kind, n), func(b *testing.B) {
				b.ReportAllocs()
				for b.Loop() {
					sinkVals, _ = jacobiEigen(h, n, vectors)
				}
			})
		}
	}
}
