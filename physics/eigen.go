package physics

import (
	"gonum.org/v1/gonum/mat"
)

// hermitianEigenvalues returns the eigenvalues of the Hermitian n×n matrix h
// (row-major) in ascending order. It embeds H = A + iB in the real symmetric
// 2n×2n matrix [[A, −B], [B, A]], whose spectrum is that of H with every
// eigenvalue doubled, and solves it with gonum's symmetric eigensolver.
func hermitianEigenvalues(h []complex128, n int) []float64 {
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
	if !es.Factorize(s, false) {
		panic("physics: symmetric eigensolver did not converge")
	}
	all := es.Values(nil)
	vals := make([]float64, n)
	for k := 0; k < n; k++ {
		vals[k] = (all[2*k] + all[2*k+1]) / 2
	}
	return vals
}
