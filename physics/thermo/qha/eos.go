package qha

import (
	"errors"
	"fmt"
	"math"
)

// EOS selects the equation of state fitted to F(V) at each temperature.
type EOS int

// Equations of state. Vinet is the zero value.
const (
	// Vinet is the universal equation of state of Vinet, Ferrante, Rose &
	// Smith, J. Geophys. Res. 92, 9319 (1987), in its energy form.
	Vinet EOS = iota
	// BirchMurnaghan is the third-order Birch–Murnaghan equation of state
	// (Birch, Phys. Rev. 71, 809 (1947)) in its energy form.
	BirchMurnaghan
)

func (e EOS) String() string {
	switch e {
	case Vinet:
		return "vinet"
	case BirchMurnaghan:
		return "birch-murnaghan"
	}
	return fmt.Sprintf("EOS(%d)", int(e))
}

// EOSFit is an equation of state fitted to energies E_i at volumes V_i:
// E0 (eV), V0 (Å³), B0 (eV/Å³) and B0' (dimensionless) at its own minimum,
// and the residuals of the fit.
type EOSFit struct {
	Kind   EOS
	E0eV   float64
	V0A3   float64
	B0eVA3 float64
	B0p    float64
	// RMSeV and MaxAbseV are the root-mean-square and the largest absolute
	// residual E_i − E(V_i), eV.
	RMSeV, MaxAbseV float64
	// bm holds the cubic in x = V^(−2/3) of the Birch–Murnaghan fit.
	bm [4]float64
}

// Energy is the fitted E(V), eV.
func (f *EOSFit) Energy(vA3 float64) float64 {
	e, _, _ := f.derivs(vA3)
	return e
}

// Pressure is −dE/dV at V, eV/Å³.
func (f *EOSFit) Pressure(vA3 float64) float64 {
	_, d1, _ := f.derivs(vA3)
	return -d1
}

// BulkModulus is V d²E/dV² at V, eV/Å³.
func (f *EOSFit) BulkModulus(vA3 float64) float64 {
	_, _, d2 := f.derivs(vA3)
	return vA3 * d2
}

// derivs returns E, dE/dV and d²E/dV² at V.
func (f *EOSFit) derivs(v float64) (e, d1, d2 float64) {
	if f.Kind == BirchMurnaghan {
		return cubicInX(f.bm, v)
	}
	return vinetDerivs(f.E0eV, f.V0A3, f.B0eVA3, f.B0p, v)
}

// cubicInX evaluates E = Σ a_k x^k, x = V^(−2/3), and its first two
// derivatives in V.
func cubicInX(a [4]float64, v float64) (e, d1, d2 float64) {
	x := math.Pow(v, -2.0/3)
	ex := a[0] + x*(a[1]+x*(a[2]+x*a[3]))
	ex1 := a[1] + x*(2*a[2]+3*x*a[3])
	ex2 := 2*a[2] + 6*x*a[3]
	xv := -2.0 / 3 * x / v      // dx/dV
	xvv := 10.0 / 9 * x / v / v // d²x/dV²
	return ex, ex1 * xv, ex2*xv*xv + ex1*xvv
}

// vinetDerivs evaluates the Vinet energy
//
//	E = E0 + 2B0V0/(B0'−1)² {2 − [5 + 3B0'(η−1) − 3η] e^(−a(η−1))},
//	η = (V/V0)^(1/3), a = (3/2)(B0'−1),
//
// whose pressure is P = 3B0 (1−η)/η² e^(a(1−η)) (Vinet et al. 1987), and
// its derivatives dE/dV = −P, d²E/dV² = −dP/dV.
func vinetDerivs(e0, v0, b0, bp, v float64) (e, d1, d2 float64) {
	eta := math.Cbrt(v / v0)
	a := 1.5 * (bp - 1)
	ex := math.Exp(a * (1 - eta))
	if math.Abs(bp-1) < 1e-9 {
		// The limit B0' → 1 of the bracket over (B0'−1)².
		bp = 1 + 1e-9
	}
	e = e0 + 2*b0*v0/((bp-1)*(bp-1))*(2-(5+3*bp*(eta-1)-3*eta)*ex)
	p := 3 * b0 * (1 - eta) / (eta * eta) * ex
	dpdeta := 3 * b0 * ex * (-1/(eta*eta) - 2*(1-eta)/(eta*eta*eta) - a*(1-eta)/(eta*eta))
	detadv := eta / (3 * v)
	return e, -p, -dpdeta * detadv
}

// ErrFit is wrapped by equation-of-state fits that cannot be made (the
// energies have no minimum near the volumes given, or too few volumes).
var ErrFit = errors.New("equation-of-state fit failed")

// FitEOS fits the equation of state kind to energies e (eV) at volumes v
// (Å³; at least 5, distinct). Birch–Murnaghan's third-order energy is a
// cubic polynomial in x = V^(−2/3), fitted by linear least squares; its
// V0, B0, B0' follow from the cubic's minimum. Vinet's is fitted by
// Levenberg–Marquardt in (V0, B0, B0') with E0 eliminated (the mean
// residual), started from the Birch–Murnaghan fit.
func FitEOS(kind EOS, v, e []float64) (*EOSFit, error) {
	if len(v) != len(e) || len(v) < 5 {
		return nil, fmt.Errorf("%w: need at least 5 volumes with an energy each, got %d and %d", ErrFit, len(v), len(e))
	}
	bm, err := fitBM(v, e)
	if err != nil {
		return nil, err
	}
	if kind == BirchMurnaghan {
		return bm, nil
	}
	if kind != Vinet {
		return nil, fmt.Errorf("%w: unknown equation of state %d", ErrFit, int(kind))
	}
	return fitVinet(v, e, bm)
}

// fitBM is the linear least-squares fit of the cubic in x = V^(−2/3).
func fitBM(v, e []float64) (*EOSFit, error) {
	// Scale x to order one for conditioning: x = s·u, s = mean x.
	var s float64
	for _, vi := range v {
		s += math.Pow(vi, -2.0/3)
	}
	s /= float64(len(v))
	rows := make([][]float64, len(v))
	for i, vi := range v {
		u := math.Pow(vi, -2.0/3) / s
		rows[i] = []float64{1, u, u * u, u * u * u}
	}
	c, err := leastSquares(rows, e)
	if err != nil {
		return nil, err
	}
	f := &EOSFit{Kind: BirchMurnaghan}
	for k := range f.bm {
		f.bm[k] = c[k] / math.Pow(s, float64(k))
	}
	if !f.bmMinimum(v) {
		return nil, fmt.Errorf("%w: the fitted Birch–Murnaghan curve has no minimum near the volumes given (are the energies of one crystal near its equilibrium?)", ErrFit)
	}
	f.residuals(v, e)
	return f, nil
}

// bmMinimum finds V0 (the minimum of the cubic near the data, a root of
// dE/dx = 0 with d²E/dx² > 0), and E0, B0, B0' there; false if there is
// none within a factor of 2 of the volumes.
func (f *EOSFit) bmMinimum(v []float64) bool {
	lo, hi := minMax(v)
	a := f.bm
	// dE/dx = a1 + 2a2 x + 3a3 x² = 0.
	var roots []float64
	if a[3] == 0 {
		if a[2] != 0 {
			roots = append(roots, -a[1]/(2*a[2]))
		}
	} else {
		disc := 4*a[2]*a[2] - 12*a[3]*a[1]
		if disc >= 0 {
			sq := math.Sqrt(disc)
			roots = append(roots, (-2*a[2]+sq)/(6*a[3]), (-2*a[2]-sq)/(6*a[3]))
		}
	}
	best := math.NaN()
	mid := (lo + hi) / 2
	for _, x := range roots {
		if !(x > 0) || 2*a[2]+6*a[3]*x <= 0 {
			continue
		}
		v0 := math.Pow(x, -1.5)
		if v0 < lo/2 || v0 > 2*hi {
			continue
		}
		if math.IsNaN(best) || math.Abs(v0-mid) < math.Abs(best-mid) {
			best = v0
		}
	}
	if math.IsNaN(best) {
		return false
	}
	f.V0A3 = best
	f.E0eV, _, _ = cubicInX(a, best)
	f.B0eVA3 = f.BulkModulus(best)
	f.B0p = bulkPrime(f, best)
	return true
}

// bulkPrime is B' = dB/dP = −V (dB/dV)/B at V, by a central difference of
// the analytic B(V) (step 1e-4 V: B is smooth on that scale).
func bulkPrime(f *EOSFit, v float64) float64 {
	h := 1e-4 * v
	db := (f.BulkModulus(v+h) - f.BulkModulus(v-h)) / (2 * h)
	return -v * db / f.BulkModulus(v)
}

// residuals fills RMSeV and MaxAbseV.
func (f *EOSFit) residuals(v, e []float64) {
	var ss, mx float64
	for i := range v {
		r := e[i] - f.Energy(v[i])
		ss += r * r
		mx = math.Max(mx, math.Abs(r))
	}
	f.RMSeV, f.MaxAbseV = math.Sqrt(ss/float64(len(v))), mx
}

// fitVinet fits Vinet's form by Levenberg–Marquardt on (V0, B0, B0'),
// each step solving the damped normal equations; E0 is the mean of
// E_i − (E(V_i) − E0) at every trial (the exact least-squares E0).
func fitVinet(v, e []float64, start *EOSFit) (*EOSFit, error) {
	p := [3]float64{start.V0A3, math.Max(start.B0eVA3, 1e-6), start.B0p}
	if !(p[2] > 1.05 && p[2] < 20) {
		p[2] = 4
	}
	resid := func(p [3]float64) ([]float64, float64, float64) {
		r := make([]float64, len(v))
		var mean float64
		for i := range v {
			g, _, _ := vinetDerivs(0, p[0], p[1], p[2], v[i])
			r[i] = e[i] - g
			mean += r[i]
		}
		mean /= float64(len(v))
		var ss float64
		for i := range r {
			r[i] -= mean
			ss += r[i] * r[i]
		}
		return r, mean, ss
	}
	r, e0, ss := resid(p)
	lambda := 1e-3
	for it := 0; it < 200; it++ {
		jac := make([][]float64, len(v))
		for i := range jac {
			jac[i] = make([]float64, 3)
		}
		for k := 0; k < 3; k++ {
			q := p
			h := 1e-6 * math.Max(math.Abs(p[k]), 1e-3)
			q[k] += h
			rq, _, _ := resid(q)
			for i := range v {
				jac[i][k] = -(rq[i] - r[i]) / h // d(model)/dp
			}
		}
		step, ok := lmStep(jac, r, lambda)
		if !ok {
			break
		}
		q := [3]float64{p[0] + step[0], p[1] + step[1], p[2] + step[2]}
		if !(q[0] > 0 && q[1] > 0 && q[2] > 1) {
			lambda *= 10
			continue
		}
		rq, e0q, ssq := resid(q)
		if ssq < ss {
			small := math.Abs(ss-ssq) <= 1e-15*(ss+1e-300) || (math.Abs(step[0]) < 1e-12*q[0] && math.Abs(step[1]) < 1e-12*q[1] && math.Abs(step[2]) < 1e-12*q[2])
			p, r, e0, ss = q, rq, e0q, ssq
			lambda = math.Max(lambda/10, 1e-12)
			if small {
				break
			}
		} else {
			lambda *= 10
			if lambda > 1e12 {
				break
			}
		}
	}
	f := &EOSFit{Kind: Vinet, E0eV: e0, V0A3: p[0], B0eVA3: p[1], B0p: p[2]}
	if !finiteAll(f.E0eV, f.V0A3, f.B0eVA3, f.B0p) {
		return nil, fmt.Errorf("%w: the Vinet fit did not converge", ErrFit)
	}
	f.residuals(v, e)
	return f, nil
}

// lmStep solves (JᵀJ + λ diag(JᵀJ)) δ = Jᵀr for the 3 parameters.
func lmStep(jac [][]float64, r []float64, lambda float64) ([3]float64, bool) {
	var a [3][3]float64
	var b [3]float64
	for i := range jac {
		for k := 0; k < 3; k++ {
			b[k] += jac[i][k] * r[i]
			for l := 0; l < 3; l++ {
				a[k][l] += jac[i][k] * jac[i][l]
			}
		}
	}
	rows := make([][]float64, 3)
	for k := 0; k < 3; k++ {
		rows[k] = []float64{a[k][0], a[k][1], a[k][2]}
		rows[k][k] *= 1 + lambda
		if rows[k][k] == 0 {
			return [3]float64{}, false
		}
	}
	x, err := solveSquare(rows, b[:])
	if err != nil {
		return [3]float64{}, false
	}
	return [3]float64{x[0], x[1], x[2]}, true
}

func minMax(v []float64) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, x := range v {
		lo, hi = math.Min(lo, x), math.Max(hi, x)
	}
	return lo, hi
}

func finiteAll(xs ...float64) bool {
	for _, x := range xs {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}
