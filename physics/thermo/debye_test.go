package thermo

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
)

// TestDebyeFunctionTable: D₃(x) and the Debye heat capacity C_V/(3Nk) =
// 4D₃(x) − 3x/(eˣ−1) against R. Pässler, Adv. Condens. Matter Phys. 2017,
// 9321439, Table 7 (D₃ as in Abramowitz & Stegun §27.1; D₃ also in
// McLeod, ACM TOMS 22, 288 (1996), Algorithm 757), to the table's 10 digits.
func TestDebyeFunctionTable(t *testing.T) {
	for _, tc := range []struct{ x, cv, d3 float64 }{
		{0.5, 0.9876107521, 0.8249629690},
		{1.0, 0.9517321357, 0.6744155641},
		{1.5, 0.8959504801, 0.5471066514},
		{2.0, 0.825408038, 0.44112847372762},
		{3.0, 0.662758044, 0.28357982814342},
		{5.0, 0.3686348236, 0.1175974118},
		{10, 0.07582100303, 0.01929576569},
		{15, 0.02307128730, 0.005771263228},
	} {
		if got := debyeFunction(3, tc.x); math.Abs(got-tc.d3) > 1e-10 {
			t.Errorf("D₃(%g) = %.12f; want %.12f", tc.x, got, tc.d3)
		}
		if got := debyeHeatCapacity(3, tc.x); math.Abs(got-tc.cv) > 1e-9 {
			t.Errorf("C_V/3Nk(%g) = %.11f; want %.10f", tc.x, got, tc.cv)
		}
	}
}

// TestDebyeT3Law: at low T, C_V = (12π⁴/5) R (T/θ)³ per mole of atoms
// (Debye T³ law, Kittel, Introduction to Solid State Physics, ch. 5;
// 12π⁴/5 = 233.7818185 computed): 3x³·C_V/(3Nk) → 12π⁴/5
// as x = θ/T → ∞ (exactly, up to e^(−x) terms).
func TestDebyeT3Law(t *testing.T) {
	for _, x := range []float64{60, 200, 1000} {
		got := 3 * x * x * x * debyeHeatCapacity(3, x)
		if math.Abs(got-233.7818185) > 1e-7 || math.Abs(got-12*math.Pow(math.Pi, 4)/5) > 1e-9*got {
			t.Errorf("x=%g: 3x³ C/3Nk = %.10f; want 12π⁴/5 = 233.7818185", x, got)
		}
	}
}

// TestDebyeFunctionsQuadrature: D₁, D₂, D₃ against their definition
// D_n(x) = (n/xⁿ) ∫₀ˣ tⁿ/(eᵗ−1) dt (A&S 27.1.1) integrated by 100-point
// Gauss–Legendre quadrature (gonum integrate/quad; the integrand is
// analytic in |Im t| < 2π, so the rule is exact to rounding), to 1e-12,
// including both sides of the series/tail switch at x = 2.
func TestDebyeFunctionsQuadrature(t *testing.T) {
	for n := 1; n <= 3; n++ {
		for _, x := range []float64{1e-3, 0.1, 1, 1.999999, 2, 2.000001, 3.7, 8, 25} {
			f := func(s float64) float64 {
				if s == 0 {
					return 0
				}
				return math.Pow(s, float64(n)) / math.Expm1(s)
			}
			want := float64(n) / math.Pow(x, float64(n)) * quad.Fixed(f, 0, x, 100, quad.Legendre{}, 0)
			if got := debyeFunction(n, x); math.Abs(got-want) > 1e-12 {
				t.Errorf("D_%d(%g) = %.15f; quadrature %.15f", n, x, got, want)
			}
		}
	}
}

// TestApery: ζ(3) as used by D₂ (A&S Table 23.3) against Σ k⁻³ to K = 1000
// plus the Euler–Maclaurin tail 1/(2K²) − 1/(2K³) + 1/(4K⁴) (A&S 23.1.30),
// error O(K⁻⁶).
func TestApery(t *testing.T) {
	const K = 1000
	s := 0.0
	for k := K; k >= 1; k-- {
		s += 1 / math.Pow(float64(k), 3)
	}
	s += 1/(2.0*K*K) - 1/(2.0*K*K*K) + 1/(4.0*K*K*K*K)
	if math.Abs(s-apery) > 1e-15 {
		t.Errorf("ζ(3) by summation %.17f; constant %.17f", s, apery)
	}
}

// TestDebyeThetaRoundTrip: θ_D(T) inverts the Debye heat capacity in 1, 2
// and 3 dimensions (Brent's method; Brent 1973, ch. 4) to 1e-10, from the
// classical to the deep quantum regime.
func TestDebyeThetaRoundTrip(t *testing.T) {
	for d := 1; d <= 3; d++ {
		for _, x := range []float64{0.05, 1, 7, 40, 300} {
			const tempK = 123.0
			c := debyeHeatCapacity(d, x)
			if got := debyeTheta(d, tempK, c) / tempK; math.Abs(got-x) > 1e-10*x {
				t.Errorf("d=%d: θ/T = %.14g from C = %.6g; want %g", d, got, c, x)
			}
		}
		if debyeTheta(d, 0, 0.5) != 0 || debyeTheta(d, 100, 0) != 0 || debyeTheta(d, 100, 1) != 0 {
			t.Errorf("d=%d: undefined cases must give 0", d)
		}
	}
}

// TestBrentRoot: roots of functions with known zeros, to the tolerance
// (common practice test functions).
func TestBrentRoot(t *testing.T) {
	for _, tc := range []struct {
		name       string
		f          func(float64) float64
		a, b, want float64
	}{
		{"sqrt2", func(x float64) float64 { return x*x - 2 }, 0, 2, math.Sqrt2},
		{"ln3", func(x float64) float64 { return math.Exp(x) - 3 }, -5, 5, math.Log(3)},
		{"steep", func(x float64) float64 { return math.Pow(x, 9) - 1e-9 }, 0, 1, 0.1},
		{"endpoint", func(x float64) float64 { return x - 1 }, 1, 4, 1},
	} {
		if got := brentRoot(tc.f, tc.a, tc.b, 1e-14); math.Abs(got-tc.want) > 1e-12*math.Abs(tc.want) {
			t.Errorf("%s: root %.16g; want %.16g", tc.name, got, tc.want)
		}
	}
}
