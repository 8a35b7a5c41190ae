// Tests of the Hermitian eigensolver on the engine's dynamical matrices.

package physics_test

import (
	"math"
	"math/cmplx"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/eigen"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// checkEigenpairs verifies H x_k = λ_k x_k and xᴴx = I to tol·scale.
func checkEigenpairs(t *testing.T, h []complex128, n int, vals []float64, vecs []complex128, tol float64) {
	t.Helper()
	scale := math.Max(testmodels.MaxAbs(vals), 1e-300)
	for k := 0; k < n; k++ {
		x := vecs[k*n : (k+1)*n]
		for r := 0; r < n; r++ {
			var s complex128
			for c := 0; c < n; c++ {
				s += h[r*n+c] * x[c]
			}
			if res := cmplx.Abs(s - complex(vals[k], 0)*x[r]); res > tol*scale {
				t.Fatalf("mode %d row %d: residual %.3g > %.3g", k, r, res, tol*scale)
			}
		}
		for l := 0; l <= k; l++ {
			var dot complex128
			for c := 0; c < n; c++ {
				dot += cmplx.Conj(vecs[l*n+c]) * x[c]
			}
			want := 0.0
			if k == l {
				want = 1
			}
			if cmplx.Abs(dot-complex(want, 0)) > tol {
				t.Fatalf("<x%d|x%d> = %v; want %v", l, k, dot, want)
			}
		}
	}
}

// TestEigenDegenerateDynamicalMatrices: dynamical matrices of a 64-site
// supercell at Γ and zone-boundary points are massively degenerate
// (folding); the eigenpairs still satisfy D x = λ x and xᴴx = I to 1e-11
// and agree with gonum.
func TestEigenDegenerateDynamicalMatrices(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Supercell(t, testmodels.Supercell(t, testmodels.Load(t, "rocksalt-like"), testmodels.ConventionalCell), [3][3]int{{2, 0, 0}, {0, 2, 0}, {0, 0, 2}}))
	n := m.ModeCount()
	for _, q := range [][3]float64{{0, 0, 0}, {0.5, 0, 0}, {0.5, 0.5, 0.5}} {
		d := m.DynamicalMatrix(q, nil)
		vals, vecs := eigen.Hermitian(d, n, true)
		want, _ := eigen.Embedded(d, n, false)
		for k := range want {
			if math.Abs(vals[k]-want[k]) > 1e-12*testmodels.MaxAbs(want) {
				t.Fatalf("q=%v λ%d = %v; gonum %v", q, k, vals[k], want[k])
			}
		}
		checkEigenpairs(t, d, n, vals, vecs, 1e-11)
	}
}

// TestTinyLatticeComponentFiniteAtGamma: a lattice component of 1e-154 Å
// (its square subnormal) left D(Γ) with subnormal rounding residue that the
// solver's power-of-two scaling overflowed into NaN — found by fuzzing. At Γ
// the acoustic frequencies are zero (acoustic sum rule; Kittel ch. 4).
func TestTinyLatticeComponentFiniteAtGamma(t *testing.T) {
	c := &physics.Crystal{
		Lattice: [][3]float64{{0, 1.4916681462400413e-154, 2}, {16.188339233398438, 0, 0}, {0, 16.188235294117646, 0}},
		Sites:   []physics.Site{{Label: "M", MassAmu: 40, Frac: []float64{0, 0, 0}}},
		Shells:  []physics.Shell{{FromLabel: "M", ToLabel: "M", Shell: 1, KLong: 1}},
	}
	m := testmodels.Compile(t, c)
	for _, f := range m.FrequenciesTHz([3]float64{}) {
		if math.IsNaN(f) || math.Abs(f) > 1e-6 {
			t.Errorf("Γ frequencies %v; want zeros", m.FrequenciesTHz([3]float64{}))
			break
		}
	}
}

// TestExtremeRangeModel: a model at the edges of every accepted range at
// once — masses of 1e-6 and 1e9 amu, force constants of 1e6 and 1e-100
// eV/Å² (MinForceEVPerA2), a denormal fractional coordinate — has dynamical
// matrices whose elements span 121 orders of magnitude plus denormal
// phases. Their eigenpairs satisfy D x = λ x and xᴴx = I to 1e-11 of the
// largest eigenvalue and agree with the real embedding (gonum) to 1e-12 of
// it (definition of an eigendecomposition; common practice), and the
// stability scan (the call that once panicked inside gonum on such a
// model, with force constants below today's floor) gives finite numbers.
func TestExtremeRangeModel(t *testing.T) {
	c := &physics.Crystal{
		Lattice: [][3]float64{{0, 2, 2}, {2, 0, 2}, {2, 2, 0}},
		Sites: []physics.Site{
			{Label: "C", MassAmu: 1e9, Frac: []float64{0, 2.37e-322, 0}},
			{Label: "B", MassAmu: 1e-6, Frac: []float64{0, 0.5, 0}},
			{Label: "A", MassAmu: 1e9, Frac: []float64{0, 0, 0.5}},
		},
		Shells: []physics.Shell{
			{FromLabel: "A", ToLabel: "C", Shell: 2, KTrans: physics.MinForceEVPerA2},
			{FromLabel: "B", ToLabel: "B", Shell: 2, KLong: physics.MaxForceEVPerA2, KTrans: 1.4e-76},
			{FromLabel: "B", ToLabel: "C", Shell: 1, KLong: -physics.MinForceEVPerA2, KTrans: physics.MinForceEVPerA2},
		},
	}
	m := testmodels.Compile(t, c)
	n := m.ModeCount()
	for _, q := range [][3]float64{{0, 0, 0}, {0.5, 0, 0}, {0.1, 0.2, 0.3}, {0.25, -0.4, 0.05}} {
		d := m.DynamicalMatrix(q, nil)
		vals, vecs := eigen.Hermitian(d, n, true)
		want, _ := eigen.Embedded(d, n, false)
		for k := range want {
			if !(math.Abs(vals[k]-want[k]) <= 1e-12*testmodels.MaxAbs(want)) {
				t.Fatalf("q=%v λ%d = %v; gonum %v", q, k, vals[k], want[k])
			}
		}
		checkEigenpairs(t, d, n, vals, vecs, 1e-11)
	}
	lo, hi, _, err := m.Stability(testmodels.Ctx(t), 4)
	if err != nil || math.IsNaN(lo) || math.IsInf(lo, 0) || math.IsNaN(hi) || math.IsInf(hi, 0) {
		t.Fatalf("stability: %v, %v, %v; want finite frequencies", lo, hi, err)
	}
}
