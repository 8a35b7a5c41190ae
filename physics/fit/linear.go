// The model at a parameter vector as a linear combination of compiled
// models: no compile inside the fit's loop.

package fit

import (
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/eigen"
)

// linear holds the compiled pieces of D(x; q) = D₀(q) + Σ_j x_j D_j(q)
// (+ the quadratic part of free charges): D₀ of the model with every free
// parameter (and its ties) at 0, D_j of the unit-parameter model of
// force-constant parameter j (eval.go). The compile is linear in the
// force constants, so this is the dynamical matrix of the model compiled
// at x, to rounding; the long-wave forms combine the same way. Free Born
// charges add the exact quadratic form of charges.go: their D_j is the
// linear coefficient 2B(Z₀, E_j), and pairs of them add x_a x_b B(E_a,
// E_b). Geometry, masses and sizes are those of zero (every model of the
// fit shares them).
type linear struct {
	zero      *physics.Model
	units     []*physics.Model       // per parameter; nil for a charge parameter
	charges   *chargeBasis           // nil without free charges
	zeroForms *physics.LongWaveForms // when long-wave data are fitted (never with charges)
	unitForms []*physics.LongWaveForms
}

// count is the number of matrices of matrices: D₀, one per parameter, one
// per pair of charge parameters.
func (l *linear) count() int {
	n := 1 + len(l.units)
	if l.charges != nil {
		n += len(l.charges.pairs)
	}
	return n
}

// matrices writes D₀(q) into mats[0], D_j(q) into mats[1+j] and the
// charge pairs' B(E_a, E_b) into mats[1+np+t] (each n×n, full),
// allocating those too short, and returns mats.
func (l *linear) matrices(q [3]float64, mats [][]complex128) [][]complex128 {
	if len(mats) < l.count() {
		mats = append(mats, make([][]complex128, l.count()-len(mats))...)
	}
	mats[0] = l.zero.DynamicalMatrix(q, mats[0])
	n := l.zero.ModeCount()
	var tmp []complex128
	for j, u := range l.units {
		if u != nil {
			mats[1+j] = u.DynamicalMatrix(q, mats[1+j])
			continue
		}
		mats[1+j], tmp = assemble(l.charges.lin[j], q, n, mats[1+j], tmp)
	}
	if l.charges != nil {
		np := len(l.units)
		for t, ts := range l.charges.quad {
			mats[1+np+t], tmp = assemble(ts, q, n, mats[1+np+t], tmp)
		}
	}
	return mats
}

// combine writes D(x) = mats[0] + Σ x_j mats[1+j] (+ Σ_pairs c x_a x_b
// mats[1+np+t], c = 1 on the diagonal, 2 off it) into out (allocating
// when short) and returns it.
func (l *linear) combine(mats [][]complex128, x []float64, out []complex128) []complex128 {
	n2 := len(mats[0])
	if cap(out) < n2 {
		out = make([]complex128, n2)
	}
	out = out[:n2]
	copy(out, mats[0])
	add := func(c float64, m []complex128) {
		if c == 0 {
			return
		}
		cc := complex(c, 0)
		for k, v := range m {
			out[k] += cc * v
		}
	}
	for j, xj := range x {
		add(xj, mats[1+j])
	}
	if l.charges != nil {
		for t, pr := range l.charges.pairs {
			c := 2 * x[pr.a] * x[pr.b]
			if pr.a == pr.b {
				c /= 2
			}
			add(c, mats[1+len(x)+t])
		}
	}
	return out
}

// derivatives returns ∂D/∂x_j at x for every parameter: mats[1+j] itself
// for a force constant; for a charge D_j + 2Σ_b x_b B(E_j, E_b), written
// into buf[j] (allocated when short). buf is returned for reuse.
func (l *linear) derivatives(mats [][]complex128, x []float64, buf [][]complex128) (dD, bufOut [][]complex128) {
	np := len(x)
	dD = make([][]complex128, np)
	copy(dD, mats[1:1+np])
	if l.charges == nil {
		return dD, buf
	}
	if len(buf) < np {
		buf = append(buf, make([][]complex128, np-len(buf))...)
	}
	n2 := len(mats[0])
	for j := range np {
		if l.units[j] != nil {
			continue
		}
		if cap(buf[j]) < n2 {
			buf[j] = make([]complex128, n2)
		}
		d := buf[j][:n2]
		copy(d, mats[1+j])
		for t, pr := range l.charges.pairs {
			var other int
			switch j {
			case pr.a:
				other = pr.b
			case pr.b:
				other = pr.a
			default:
				continue
			}
			c := complex(2*x[other], 0)
			for k, v := range mats[1+np+t] {
				d[k] += c * v
			}
		}
		dD[j] = d
	}
	return dD, buf
}

// eigenTol bounds the eigenvalue tolerance of the model at x
// (physics.Model.EigenTol, which grows with the Gershgorin bound of D:
// that of D₀ plus |x_j| times that of D_j bounds it; for charges, whose
// term is quadratic, the square of the sum of |x_a| times the square root
// of the unit-charge term's, added to D₀'s).
func (l *linear) eigenTol(x []float64) float64 {
	t := l.zero.EigenTol()
	var sq float64
	for j, u := range l.units {
		if u == nil {
			sq += math.Abs(x[j]) * math.Sqrt(l.charges.tol[j])
			continue
		}
		t += math.Abs(x[j]) * u.EigenTol()
	}
	return t + sq*sq + 2*sq*math.Sqrt(l.zero.EigenTol())
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
