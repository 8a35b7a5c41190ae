package physics

import (
	"math"

	"gonum.org/v1/gonum/integrate/quad"
)

// This file holds the Debye model: the Debye functions, the heat capacity
// of a Debye solid in d dimensions, the Debye temperature equivalent θ_D(T)
// of a model, and θ_D from the sound velocities in the elastic limit.
//
// Sources: P. Debye, Ann. Phys. 344, 789 (1912); the Debye functions as
// defined in Abramowitz & Stegun, Handbook of Mathematical Functions,
// §27.1; Kittel, Introduction to Solid State Physics, ch. 5; Ashcroft &
// Mermin, Solid State Physics, ch. 23.

// apery is ζ(3) (Abramowitz & Stegun, Table 23.3).
const apery = 1.2020569031595942854

// zetaInt is ζ(n+1) for n = 1, 2, 3 (ζ(2) = π²/6, ζ(4) = π⁴/90: A&S 23.2.24).
var zetaInt = [4]float64{0, math.Pi * math.Pi / 6, apery, math.Pi * math.Pi * math.Pi * math.Pi / 90}

// bernoulliTaylor[k] = B_k/k!, the Taylor coefficients of t/(eᵗ − 1)
// (A&S 23.1.1), from (eᵗ − 1)/t · Σ f_k tᵏ = 1: f_k = −Σ_{i<k} f_i/(k−i+1)!.
var bernoulliTaylor = func() [debyeSeriesTerms]float64 {
	var f [debyeSeriesTerms]float64
	f[0] = 1
	for k := 1; k < debyeSeriesTerms; k++ {
		s, fact := 0.0, 1.0 // fact = (k−i+1)!
		for i := k - 1; i >= 0; i-- {
			fact *= float64(k - i + 1)
			s += f[i] / fact
		}
		f[k] = -s
	}
	return f
}()

const (
	debyeSeriesTerms = 42  // |B_k/k!| x^k ≤ 2(x/2π)^k: below 1e-18 of the sum at x ≤ debyeSeriesMax
	debyeSeriesMax   = 2.0 // series below, tail sum above
)

// debyeFunction returns D_n(x) = (n/xⁿ) ∫₀ˣ tⁿ/(eᵗ − 1) dt for n = 1, 2, 3
// and x ≥ 0 (A&S 27.1.1 with the normalisation D_n(0) = 1). Below x = 2 it
// sums the Bernoulli series of the integrand, tⁿ/(eᵗ − 1) = tⁿ⁻¹ Σ B_k tᵏ/k!
// (radius 2π); above, n!ζ(n+1) minus the tail ∫ₓ^∞ = Σ_k e^(−kx) Σ_j
// n!/j! xʲ/k^(n+1−j) (A&S 27.1.2 and the incomplete gamma function of
// integer order, A&S 6.5.13).
func debyeFunction(n int, x float64) float64 {
	if x <= 0 {
		return 1
	}
	fn := float64(n)
	if x <= debyeSeriesMax {
		s, p := 0.0, 1.0
		for k := 0; k < debyeSeriesTerms; k++ {
			if f := bernoulliTaylor[k]; f != 0 {
				s += f * p / (fn + float64(k))
			}
			p *= x
		}
		return fn * s
	}
	nfact := [4]float64{1, 1, 2, 6}[n]
	tail := 0.0
	for k := 1; ; k++ {
		fk := float64(k)
		ek := math.Exp(-fk * x)
		// Σ_j n!/j! x^j / k^(n+1−j), j = 0..n
		poly, xj, jfact := 0.0, 1.0, 1.0
		for j := 0; j <= n; j++ {
			if j > 0 {
				xj *= x
				jfact *= float64(j)
			}
			poly += nfact / jfact * xj / math.Pow(fk, fn+1-float64(j))
		}
		term := ek * poly
		tail += term
		if term < 1e-18*tail || ek == 0 {
			break
		}
	}
	return fn / math.Pow(x, fn) * (nfact*zetaInt[n] - tail)
}

// debyeHeatCapacity is the heat capacity per mode, in units of k_B, of the
// d-dimensional Debye model at x = θ/T: C/(dNk) = (d+1) D_d(x) − d x/(eˣ − 1)
// (A&S 27.1 for d = 3: 4D₃(x) − 3x/(eˣ − 1); the same integration by parts
// of (d/x^d) ∫₀ˣ t^(d+1) eᵗ/(eᵗ − 1)² dt in any d).
func debyeHeatCapacity(d int, x float64) float64 {
	if x <= 0 {
		return 1
	}
	fd := float64(d)
	b := 0.0
	if x < 700 {
		b = x / math.Expm1(x)
	}
	return (fd+1)*debyeFunction(d, x) - fd*b
}

// debyeTheta returns θ such that the d-dimensional Debye model has heat
// capacity c per mode (units of k_B) at temperature tempK; 0 where no such θ
// exists (T = 0, c ≤ 0 or c ≥ 1 to rounding). debyeHeatCapacity falls
// monotonically from 1 at x = 0 to 0, so the root is bracketed by doubling
// and found by Brent's method.
func debyeTheta(d int, tempK, c float64) float64 {
	if !(tempK > 0) || !(c > 0) || !(c < 1) {
		return 0
	}
	f := func(x float64) float64 { return debyeHeatCapacity(d, x) - c }
	a, b := 0.0, 1.0
	for f(b) > 0 {
		a, b = b, 2*b
		if b > 1e300 {
			return 0
		}
	}
	return brentRoot(f, a, b, 1e-14) * tempK
}

// brentRoot finds a zero of f in [a, b], where f(a) and f(b) differ in sign,
// by Brent's method: inverse quadratic interpolation and secant steps,
// falling back to bisection whenever they would leave the bracket or
// converge slowly (R. P. Brent, Algorithms for Minimization without
// Derivatives, Prentice-Hall 1973, ch. 4; Press et al., Numerical Recipes,
// §9.3). The relative tolerance rel bounds the final bracket.
func brentRoot(f func(float64) float64, a, b, rel float64) float64 {
	fa, fb := f(a), f(b)
	if fa == 0 {
		return a
	}
	if fb == 0 {
		return b
	}
	c, fc := a, fa
	d := b - a
	e := d
	for iter := 0; iter < 200; iter++ {
		if (fb > 0) == (fc > 0) {
			c, fc = a, fa
			d = b - a
			e = d
		}
		if math.Abs(fc) < math.Abs(fb) {
			a, b, c = b, c, b
			fa, fb, fc = fb, fc, fb
		}
		tol := 2*2.2e-16*math.Abs(b) + 0.5*rel*math.Abs(b)
		m := 0.5 * (c - b)
		if math.Abs(m) <= tol || fb == 0 {
			return b
		}
		if math.Abs(e) >= tol && math.Abs(fa) > math.Abs(fb) {
			s := fb / fa
			var p, q float64
			if a == c { // secant
				p = 2 * m * s
				q = 1 - s
			} else { // inverse quadratic interpolation
				q = fa / fc
				r := fb / fc
				p = s * (2*m*q*(q-r) - (b-a)*(r-1))
				q = (q - 1) * (r - 1) * (s - 1)
			}
			if p > 0 {
				q = -q
			} else {
				p = -p
			}
			if 2*p < math.Min(3*m*q-math.Abs(tol*q), math.Abs(e*q)) {
				e = d
				d = p / q
			} else {
				d = m
				e = m
			}
		} else {
			d = m
			e = m
		}
		a, fa = b, fb
		if math.Abs(d) > tol {
			b += d
		} else if m > 0 {
			b += tol
		} else {
			b -= tol
		}
		fb = f(b)
	}
	return b
}

// elasticDebyeTemperature returns θ_D from the sound velocities of the
// acoustic branches in the elastic (long-wavelength) limit: the Debye model
// whose low-frequency DOS matches the model's, g(ν) = V S_d ν^(d−1) Σ_s
// ⟨v_s^(−d)⟩ per cell, holding all p·sites modes (Kittel ch. 5;
// Ashcroft & Mermin ch. 23): ν_D^d = d·p·sites / (V S_d Σ_s ⟨v_s^(−d)⟩),
// θ = hν_D/k, with V the cell volume (length, area) and S_d = 2, 2π, 4π.
// The direction average is exact for d = 1, a 64-point trapezoid rule on
// the circle for d = 2 and a 16×32 Gauss–Legendre × trapezoid product rule
// on the sphere for d = 3. It is 0 when undefined: p < d, a non-positive
// or imaginary acoustic velocity, or no lattice.
func elasticDebyeTemperature(m *Model) float64 {
	d, p := m.Dim(), m.P()
	if p < d || d < 1 || d > 3 {
		return 0
	}
	basis := latticeSpanBasis(m)
	type dirW struct {
		dir [3]float64
		w   float64
	}
	var dirs []dirW
	switch d {
	case 1:
		dirs = []dirW{{basis[0], 0.5}, {[3]float64{-basis[0][0], -basis[0][1], -basis[0][2]}, 0.5}}
	case 2:
		const nphi = 64
		for j := 0; j < nphi; j++ {
			phi := 2 * math.Pi * float64(j) / nphi
			var v [3]float64
			for a := 0; a < 3; a++ {
				v[a] = math.Cos(phi)*basis[0][a] + math.Sin(phi)*basis[1][a]
			}
			dirs = append(dirs, dirW{v, 1.0 / nphi})
		}
	default:
		const nmu, nphi = 16, 32
		mu := make([]float64, nmu)
		wmu := make([]float64, nmu)
		quad.Legendre{}.FixedLocations(mu, wmu, -1, 1)
		for i := range mu {
			st := math.Sqrt(1 - mu[i]*mu[i])
			for j := 0; j < nphi; j++ {
				phi := 2 * math.Pi * (float64(j) + 0.5) / nphi
				var v [3]float64
				for a := 0; a < 3; a++ {
					v[a] = st*math.Cos(phi)*basis[0][a] + st*math.Sin(phi)*basis[1][a] + mu[i]*basis[2][a]
				}
				dirs = append(dirs, dirW{v, wmu[i] / 2 / nphi})
			}
		}
	}
	sum := 0.0 // Σ_s ⟨v_s^(−d)⟩, (Å·THz)^(−d)
	for _, dw := range dirs {
		vs := acousticSpeedsATHz(m, dw.dir)
		if len(vs) != p {
			return 0
		}
		for _, v := range vs {
			if !(v > 0) {
				return 0
			}
			sum += dw.w * math.Pow(v, -float64(d))
		}
	}
	sd := [4]float64{0, 2, 2 * math.Pi, 4 * math.Pi}[d]
	vol := cellMeasure(m)
	nuD := math.Pow(float64(d*p*m.Sites())/(vol*sd*sum), 1/float64(d))
	return nuD * THzToKelvin
}

// acousticSpeedsATHz returns the sound velocities of the p acoustic
// branches along the Cartesian unit vector dir in Å·THz (Model.
// SoundVelocities gives km/s; 1 km/s = 10 Å·THz), the unit in which
// ν = v|q|/2π with q in Å⁻¹.
func acousticSpeedsATHz(m *Model, dir [3]float64) []float64 {
	v := m.SoundVelocities(dir)
	for s := range v {
		v[s] *= 10
	}
	return v
}

// latticeSpanBasis returns an orthonormal basis (Gram–Schmidt) of the
// space spanned by the d lattice vectors; rows past d complete it to R³
// only for d = 3.
func latticeSpanBasis(m *Model) [3][3]float64 {
	lat := m.Lattice()
	var b [3][3]float64
	for k := 0; k < m.Dim(); k++ {
		v := lat[k]
		for j := 0; j < k; j++ {
			c := dot3(v, b[j])
			for a := 0; a < 3; a++ {
				v[a] -= c * b[j][a]
			}
		}
		l := norm3(v)
		for a := 0; a < 3; a++ {
			b[k][a] = v[a] / l
		}
	}
	return b
}

// cellMeasure is the length, area or volume of the cell (Å^d): the square
// root of the Gram determinant of the lattice vectors.
func cellMeasure(m *Model) float64 {
	lat := m.Lattice()
	return gramMeasure(lat[:m.Dim()])
}
