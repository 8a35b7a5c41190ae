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
// converge either, the results are NaN. The matrix must be finite.
func Embedded(h []complex128, n int, vectors bool) ([]float64, []complex128) {
	s, exp := embed(h, n)
	vals := make([]float64, n)
	var es mat.EigenSym
	if !es.Factorize(s, vectors) {
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
	all := es.Values(nil)
	for k := range all {
		all[k] = math.Ldexp(all[k], exp)
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

// embed returns the real symmetric 2n×2n embedding [[A, −B], [B, A]] of
// H = A + iB scaled by 2^−exp, a power of two (exact) that brings the
// largest element near 1: gonum v0.17 panics inside Dsterf on matrices of
// very small norm (found by TestEigenAgainstGonum at 1e-150).
func embed(h []complex128, n int) (s *mat.SymDense, exp int) {
	var amax float64
	for i := 0; i < n; i++ {
		for _, z := range h[i*n : i*n+i+1] {
			amax = math.Max(amax, math.Max(math.Abs(real(z)), math.Abs(imag(z))))
		}
	}
	if amax > 0 && !math.IsInf(amax, 0) {
		_, exp = math.Frexp(amax)
	}
	down := math.Ldexp(1, -exp)
	s = mat.NewSymDense(2*n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j <= i; j++ {
			z := h[i*n+j] * complex(down, 0)
			s.SetSym(i, j, real(z))
			s.SetSym(n+i, n+j, real(z))
			// Block B at (n+i, j) holds imag(h_ij); −B at (i, n+j) is its
			// mirror (−B = Bᵀ for Hermitian H).
			s.SetSym(n+i, j, imag(z))
			s.SetSym(n+j, i, -imag(z))
		}
	}
	return s, exp
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
