package thermo

import (
	"math"
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
