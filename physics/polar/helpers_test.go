// Test crystals and helpers shared by the tests of the dipole–dipole term.

package polar_test

import (
	"context"
	"math"
	"math/cmplx"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/polar"
)

// iso is a 3×3 isotropic tensor x·1, row-major.
func iso(x float64) []float64 { return []float64{x, 0, 0, 0, x, 0, 0, 0, x} }

// diag is the tensor diag(a, b, c).
func diag(a, b, c float64) []float64 { return []float64{a, 0, 0, 0, b, 0, 0, 0, c} }

// rockSalt is an invented two-site crystal on an fcc lattice (cubic
// constant 2a = 5.6 Å), sites of 25 and 80 amu at 0 and ½ with charges
// ±z, nearest-neighbour springs between unlike sites and ε∞ as given: the
// rigid-ion model of the cubic two-site checks.
func rockSalt(z float64, eps []float64) *physics.Crystal {
	const a = 2.8
	return &physics.Crystal{
		Lattice: [][3]float64{{0, a, a}, {a, 0, a}, {a, a, 0}},
		Sites: []physics.Site{
			{Label: "P", MassAmu: 25, Frac: []float64{0, 0, 0}, BornCharge: iso(z)},
			{Label: "Q", MassAmu: 80, Frac: []float64{0.5, 0.5, 0.5}, BornCharge: iso(-z)},
		},
		Shells: []physics.Shell{
			{FromLabel: "P", ToLabel: "Q", Shell: 1, KLong: 3, KTrans: 0.3},
			{FromLabel: "P", ToLabel: "P", Shell: 1, KLong: 0.2, KTrans: 0.05},
		},
		EpsilonInf: eps,
	}
}

// lowSymmetry is an invented three-site triclinic crystal with general
// (non-symmetric, neutral) Born charges and an anisotropic ε∞ with
// off-diagonal elements: no symmetry helps any sum.
func lowSymmetry() *physics.Crystal {
	za := []float64{2.1, 0.3, -0.2, 0.1, 1.8, 0.25, -0.3, 0.15, 2.4}
	zb := []float64{-1.2, 0.2, 0.1, -0.1, -0.9, 0.3, 0.2, -0.1, -1.1}
	zc := make([]float64, 9)
	for k := range zc {
		zc[k] = -za[k] - zb[k]
	}
	return &physics.Crystal{
		Lattice: [][3]float64{{4.1, 0, 0}, {0.7, 3.9, 0}, {0.4, 0.9, 4.4}},
		Sites: []physics.Site{
			{Label: "A", MassAmu: 30, Frac: []float64{0, 0, 0}, BornCharge: za},
			{Label: "B", MassAmu: 16, Frac: []float64{0.37, 0.21, 0.55}, BornCharge: zb},
			{Label: "C", MassAmu: 50, Frac: []float64{0.68, 0.59, 0.13}, BornCharge: zc},
		},
		Springs: []physics.Spring{
			{From: 0, To: 1, Cell: []int{0, 0, 0}, KLong: 4, KTrans: 0.5},
			{From: 1, To: 2, Cell: []int{0, 0, 0}, KLong: 3, KTrans: 0.4},
			{From: 2, To: 0, Cell: []int{1, 1, 0}, KLong: 3.5, KTrans: 0.3},
			{From: 0, To: 0, Cell: []int{1, 0, 0}, KLong: 1, KTrans: 0.2},
			{From: 1, To: 1, Cell: []int{0, 1, 0}, KLong: 1, KTrans: 0.2},
			{From: 2, To: 2, Cell: []int{0, 0, 1}, KLong: 1, KTrans: 0.2},
		},
		EpsilonInf: []float64{5.2, 0.3, -0.2, 0.3, 4.7, 0.1, -0.2, 0.1, 6.1},
	}
}

// compile compiles c with the dipole–dipole term at Ewald parameter
// lambda (0: the default).
func compile(t testing.TB, c *physics.Crystal, lambda float64) *physics.Model {
	t.Helper()
	m, err := physics.Compile(context.Background(), c, physics.Options{LongRange: polar.BuilderWith(polar.Params{LambdaInvA: lambda})})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// term is the model's dipole–dipole term.
func term(t testing.TB, m *physics.Model) *polar.Term {
	t.Helper()
	tm, ok := m.LongRangeTerm().(*polar.Term)
	if !ok {
		t.Fatalf("the model has no dipole–dipole term (%T)", m.LongRangeTerm())
	}
	return tm
}

// maxAbs is the largest |z| of a matrix.
func maxAbs(a []complex128) float64 {
	s := 0.0
	for _, z := range a {
		s = math.Max(s, cmplx.Abs(z))
	}
	return s
}

// maxDiff is the largest |a − b| elementwise.
func maxDiff(a, b []complex128) float64 {
	s := 0.0
	for i := range a {
		s = math.Max(s, cmplx.Abs(a[i]-b[i]))
	}
	return s
}

// sqTHzToSI converts ν² in THz² to ω² in rad²/s².
func sqTHzToSI(nuTHz float64) float64 {
	w := 2 * math.Pi * nuTHz * 1e12
	return w * w
}

// relClose reports |got − want| ≤ tol·max(|want|, floor).
func relClose(got, want, tol, floor float64) bool {
	return math.Abs(got-want) <= tol*math.Max(math.Abs(want), floor)
}
