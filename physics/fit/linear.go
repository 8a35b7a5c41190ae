// The model at a parameter vector as a linear combination of compiled
// models: no compile inside the fit's loop.

package fit

import (
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/eigen"
)

// linear holds the compiled pieces of D(x; q) = D₀(q) + Σ_j x_j D_j(q):
// D₀ of the model with every free parameter (and its ties) at 0, D_j of
// the unit-parameter model of parameter j (eval.go). The compile is
// linear in the force constants, so this is the dynamical matrix of the
// model compiled at x, to rounding; the long-wave forms combine the same
// way. Geometry, masses and sizes are those of zero (every model of the
// fit shares them).
type linear struct {
	zero      *physics.Model
	units     []*physics.Model
	zeroForms *physics.LongWaveForms // when long-wave data are fitted
	unitForms []*physics.LongWaveForms
}

// matrices writes D₀(q) into mats[0] and D_j(q) into mats[1+j] (each
// n×n, full), allocating those too short, and returns mats.
func (l *linear) matrices(q [3]float64, mats [][]complex128) [][]complex128 {
	if len(mats) < 1+len(l.units) {
		mats = make([][]complex128, 1+len(l.units))
	}
	mats[0] = l.zero.DynamicalMatrix(q, mats[0])
	for j, u := range l.units {
		mats[1+j] = u.DynamicalMatrix(q, mats[1+j])
	}
	return mats
}

// combine writes D(x) = mats[0] + Σ x_j mats[1+j] into out (allocating
// when short) and returns it.
func combine(mats [][]complex128, x []float64, out []complex128) []complex128 {
	n2 := len(mats[0])
	if cap(out) < n2 {
		out = make([]complex128, n2)
	}
	out = out[:n2]
	copy(out, mats[0])
	for j, xj := range x {
		if xj == 0 {
			continue
		}
		c := complex(xj, 0)
		for k, v := range mats[1+j] {
			out[k] += c * v
		}
	}
	return out
}

// eigenTol bounds the eigenvalue tolerance of the model at x
// (physics.Model.EigenTol, which grows with the Gershgorin bound of D:
// that of D₀ plus |x_j| times that of D_j bounds it).
func (l *linear) eigenTol(x []float64) float64 {
	t := l.zero.EigenTol()
	for j, u := range l.units {
		t += math.Abs(x[j]) * u.EigenTol()
	}
	return t
}

// solve diagonalises the Hermitian d (n×n, lower triangle read) with
// eigenvectors, applies the engine's zero rule (physics/doc.go, Zero and
// imaginary modes: at Γ the p eigenvalues of smallest |λ| within tol are
// 0, anywhere a negative eigenvalue within tol is 0), and returns the
// eigenvalues (eV/Å²/amu, ascending), frequencies (THz, signed) and
// eigenvectors (mode-major).
func solve(w *eigen.Work, d []complex128, q [3]float64, p int, tol float64) (lam, nu []float64, vecs []complex128) {
	n := w.N()
	copy(w.A(), d)
	if w.Solve(true) == eigen.NoConverge {
		vals, v := eigen.Embedded(d, n, true)
		copy(w.Values(), vals)
		copy(w.Vectors(), v)
	}
	lam = append([]float64(nil), w.Values()...)
	if physics.IsGamma(q) {
		for range p {
			best := -1
			for k, v := range lam {
				if v != 0 && math.Abs(v) <= tol && (best < 0 || math.Abs(v) < math.Abs(lam[best])) {
					best = k
				}
			}
			if best < 0 {
				break
			}
			lam[best] = 0
		}
	}
	nu = make([]float64, n)
	for k, v := range lam {
		if v < 0 && v >= -tol {
			lam[k], v = 0, 0
		}
		nu[k] = math.Copysign(math.Sqrt(math.Abs(v)), v) * physics.NuUnitTHz
	}
	return lam, nu, w.Vectors()
}

// forms returns the long-wave forms at x.
func (l *linear) forms(x []float64) *physics.LongWaveForms {
	f := *l.zeroForms
	f.Phi0 = append([]float64(nil), f.Phi0...)
	f.Y = append([]float64(nil), f.Y...)
	f.G2 = append([]float64(nil), f.G2...)
	for j, u := range l.unitForms {
		xj := x[j]
		if xj == 0 {
			continue
		}
		axpy(f.Phi0, xj, u.Phi0)
		axpy(f.Y, xj, u.Y)
		axpy(f.G2, xj, u.G2)
		f.YScale += math.Abs(xj) * u.YScale
	}
	return &f
}

func axpy(y []float64, a float64, x []float64) {
	for i, v := range x {
		y[i] += a * v
	}
}
