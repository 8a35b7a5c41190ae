// The real symmetric embedding of a Hermitian eigenproblem, solved by gonum:
// the engine's first eigensolver, now the fallback of eigen.go and the
// reference its tests compare against.

package eigen

import (
	"math"
	"math/cmplx"

	"gonum.org/v1/gonum/mat"
)

// Embedded returns the eigenvalues of the Hermitian n×n matrix h
// (row-major; the lower triangle is read) in ascending order and, when
// vectors is true, orthonormal eigenvectors, mode-major.
//
// It embeds H = A + iB in the real symmetric 2n×2n matrix [[A, −B], [B, A]],
// whose spectrum is that of H with every eigenvalue doubled: (u; v) is an
// eigenvector exactly when u + iv is one of H, and its partner (−v; u) is
// i(u + iv). A complex Gram–Schmidt pass over the real eigenvectors in
// ascending order keeps one complex vector per direction. If gonum does not
// converge either, or the matrix is not finite, the results are NaN.
//
// The embedding is solved shifted (embed): gonum's tridiagonal QL is
// wrong on a diagonal block whose norm is far below the rest, which the
// shift rules out.
func Embedded(h []complex128, n int, vectors bool) ([]float64, []complex128) {
	vals := make([]float64, n)
	var es mat.EigenSym
	if !finiteLower(h, n) {
		return nanResults(vals, vectors)
	}
	s, exp, shift := embed(h, n)
	if !es.Factorize(s, vectors) {
		return nanResults(vals, vectors)
	}
	all := es.Values(nil)
	for k := range all {
		all[k] = math.Ldexp(all[k]-shift, exp)
	}
	if !vectors {
		for k := 0; k < n; k++ {
			vals[k] = (all[2*k] + all[2*k+1]) / 2
		}
		return vals, nil
	}
	var ev mat.Dense
	es.VectorsTo(&ev)
	vecs := complexVectors(&ev, all, n, vals)
	return vals, vecs
}

// nanResults fills vals with NaN and returns it with NaN vectors when
// asked: the answer for a matrix Embedded cannot solve.
func nanResults(vals []float64, vectors bool) ([]float64, []complex128) {
	n := len(vals)
	for k := range vals {
		vals[k] = math.NaN()
	}
	var vecs []complex128
	if vectors {
		vecs = make([]complex128, n*n)
		for k := range vecs {
			vecs[k] = cmplx.NaN()
		}
	}
	return vals, vecs
}

// finiteLower reports whether every element of the lower triangle of the
// n×n matrix h is finite.
func finiteLower(h []complex128, n int) bool {
	for i := 0; i < n; i++ {
		for _, z := range h[i*n : i*n+i+1] {
			if cmplx.IsNaN(z) || cmplx.IsInf(z) {
				return false
			}
		}
	}
	return true
}

// embed returns the real symmetric 2n×2n embedding [[A, −B], [B, A]] of
// H = A + iB scaled by 2^−exp and shifted: S = 2^−exp H + shift·I.
//
// The power of two (exact) brings the largest element near 1. The shift,
// twice the Gershgorin bound g ≥ ‖2^−exp H‖₂, puts every eigenvalue of S,
// and so every diagonal element of its tridiagonal form, in [g, 3g]: no
// unreduced block of that tridiagonal is then small. gonum v0.17 mishandles
// such blocks (lapack/gonum, when a block's norm is below ≈1e-122 of the
// largest element): Dsterf, its values-only path, passes the matrix size as
// the stride of a vector and panics with "lapack: insufficient length of
// a" (found on a dynamical matrix mixing force constants of 1e-77 and
// 1e-300 eV/Å²); Dsteqr, its path with vectors, never resets its scaling
// flag and multiplies later blocks by the ratio of the scales (eigenvalues
// of 1e121). Before the shift, a matrix of very small norm panicked the same
// way (found by TestEigenAgainstGonum at 1e-150). The shift costs absolute
// accuracy of a few ε·g in every eigenvalue, within the ε‖H‖ the solver
// promises anyway.
func embed(h []complex128, n int) (s *mat.SymDense, exp int, shift float64) {
	var amax float64
	for i := 0; i < n; i++ {
		for _, z := range h[i*n : i*n+i+1] {
			amax = math.Max(amax, math.Max(math.Abs(real(z)), math.Abs(imag(z))))
		}
	}
	if amax > 0 && !math.IsInf(amax, 0) {
		_, exp = math.Frexp(amax)
	}
	s = mat.NewSymDense(2*n, nil)
	rows := make([]float64, n) // Gershgorin: Σⱼ |Re hᵢⱼ| + |Im hᵢⱼ|, scaled
	for i := 0; i < n; i++ {
		for j := 0; j <= i; j++ {
			// Ldexp per element: 2^−exp itself overflows when the
			// largest element is a denormal.
			re, im := math.Ldexp(real(h[i*n+j]), -exp), math.Ldexp(imag(h[i*n+j]), -exp)
			s.SetSym(i, j, re)
			s.SetSym(n+i, n+j, re)
			// Block B at (n+i, j) holds imag(h_ij); −B at (i, n+j) is its
			// mirror (−B = Bᵀ for Hermitian H).
			s.SetSym(n+i, j, im)
			s.SetSym(n+j, i, -im)
			rows[i] += math.Abs(re) + math.Abs(im)
			if j != i {
				rows[j] += math.Abs(re) + math.Abs(im)
			}
		}
	}
	for _, r := range rows {
		shift = math.Max(shift, 2*r)
	}
	for i := 0; i < 2*n; i++ {
		s.SetSym(i, i, s.At(i, i)+shift)
	}
	return s, exp, shift
}

// complexVectors turns the real eigenvectors ev of the embedding (columns,
// eigenvalues all ascending) into n orthonormal complex eigenvectors of H,
// mode-major, by a complex Gram–Schmidt pass that keeps one vector per
// direction, and writes the eigenvalue of each kept vector into vals.
func complexVectors(ev *mat.Dense, all []float64, n int, vals []float64) []complex128 {
	vecs := make([]complex128, n*n)
	z := make([]complex128, n)
	found := 0
	for col := 0; col < 2*n && found < n; col++ {
		for c := 0; c < n; c++ {
			z[c] = complex(ev.At(c, col), ev.At(n+c, col))
		}
		for k := 0; k < found; k++ {
			var dot complex128
			for c := 0; c < n; c++ {
				dot += cmplx.Conj(vecs[k*n+c]) * z[c]
			}
			for c := 0; c < n; c++ {
				z[c] -= dot * vecs[k*n+c]
			}
		}
		var nrm float64
		for _, x := range z {
			nrm += real(x)*real(x) + imag(x)*imag(x)
		}
		if nrm < 0.25 { // in the span of vectors already kept
			continue
		}
		inv := complex(1/math.Sqrt(nrm), 0)
		for c := 0; c < n; c++ {
			vecs[found*n+c] = z[c] * inv
		}
		vals[found] = all[col]
		found++
	}
	return vecs
}
