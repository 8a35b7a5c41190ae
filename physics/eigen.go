package physics

import (
	"math"
	"math/cmplx"

	"gonum.org/v1/gonum/mat"
)

// hermitianEigen returns the eigenvalues of the Hermitian n×n matrix h
// (row-major) in ascending order and, when vectors is true, orthonormal
// eigenvectors, mode-major: vecs[k*n+c] is component c of mode k.
//
// It embeds H = A + iB in the real symmetric 2n×2n matrix [[A, −B], [B, A]],
// whose spectrum is that of H with every eigenvalue doubled: (u; v) is an
// eigenvector exactly when u + iv is one of H, and its partner (−v; u) is
// i(u + iv). A complex Gram–Schmidt pass over the real eigenvectors in
// ascending order keeps one complex vector per direction.
func hermitianEigen(h []complex128, n int, vectors bool) ([]float64, []complex128) {
	s := mat.NewSymDense(2*n, nil)
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			z := h[i*n+j]
			s.SetSym(i, j, real(z))
			s.SetSym(n+i, n+j, real(z))
			s.SetSym(i, n+j, -imag(z))
			s.SetSym(j, n+i, imag(z))
		}
	}
	var es mat.EigenSym
	if !es.Factorize(s, vectors) {
		panic("physics: symmetric eigensolver did not converge")
	}
	all := es.Values(nil)
	vals := make([]float64, n)
	if !vectors {
		for k := 0; k < n; k++ {
			vals[k] = (all[2*k] + all[2*k+1]) / 2
		}
		return vals, nil
	}
	var ev mat.Dense
	es.VectorsTo(&ev)
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
	return vals, vecs
}
