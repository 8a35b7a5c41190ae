// The elastic Debye temperature (Model.ElasticDebyeTemperature) against
// closed forms.

package physics_test

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"

	"github.com/materials-lab/modegrid/physics/lattice"
)

// TestElasticDebyeChain: for the monatomic chain the sound velocity is
// v = a·sqrt(K/M) (Kittel ch. 5) = a·πν_max, and the 1D Debye cutoff is
// ν_D = v/(2a) (one mode per cell), so θ_D = (π/2)·hν_max/k.
func TestElasticDebyeChain(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "chain"))
	want := math.Pi / 2 * chainNuMaxTHz * physics.THzToKelvin
	if got := testmodels.ElasticTheta(t, m); testmodels.RelDiff(got, want) > 1e-8 {
		t.Errorf("elastic θ_D = %.9f K; want (π/2)hν_max/k = %.9f K", got, want)
	}
	v := mustSpeedsATHz(t, m, [3]float64{1, 0, 0})
	if want := 2.5 * math.Sqrt(1.5/40) * physics.OmegaUnitRadPerS * 1e-12; testmodels.RelDiff(v[0], want) > 1e-8 {
		t.Errorf("sound velocity %.9g Å·THz; want a·sqrt(K/M) = %.9g", v[0], want)
	}
}

// TestSoundVelocitiesFCC: along [100] the fcc nearest-neighbour model has
// v_L = a·sqrt(K/2M) and a doubly degenerate v_T = a·sqrt(K/4M), the slopes
// of ω²M/K = 4(1 − cos(qa/2)) and 2(1 − cos(qa/2)), which reach the
// X-point values 8 and 4 (derived from the standard NN dynamical matrix;
// Ashcroft & Mermin, Solid State Physics, ch. 22). Cubic constant a = 4 Å, K =
// 1.2 eV/Å², M = 60 amu (proto/examples/fcc.json).
func TestSoundVelocitiesFCC(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	unit := physics.OmegaUnitRadPerS * 1e-12 // sqrt(eV/Å²/amu)·Å in Å·THz
	vL, vT := 4*math.Sqrt(1.2/120)*unit, 4*math.Sqrt(1.2/240)*unit
	v := mustSpeedsATHz(t, m, [3]float64{1, 0, 0})
	for i, want := range []float64{vT, vT, vL} {
		if testmodels.RelDiff(v[i], want) > 1e-8 {
			t.Errorf("branch %d: %.9g Å·THz; want %.9g", i, v[i], want)
		}
	}
	// The elastic θ_D from the 16×32 product rule against an independent
	// average of Σ_s v_s⁻³ over 4000 random directions (uniform on the
	// sphere: normalised Gaussian vectors, common practice), Monte Carlo
	// error ≈ 0.5 %: ν_D³ = 9·sites/(4πV Σ⟨v⁻³⟩) (Kittel ch. 5).
	r := rand.New(rand.NewPCG(5, 1912))
	sum := 0.0
	const ndir = 4000
	for i := 0; i < ndir; i++ {
		d := [3]float64{r.NormFloat64(), r.NormFloat64(), r.NormFloat64()}
		l := lattice.Norm(d)
		for _, v := range mustSpeedsATHz(t, m, [3]float64{d[0] / l, d[1] / l, d[2] / l}) {
			sum += math.Pow(v, -3) / ndir
		}
	}
	want := math.Cbrt(9/(4*math.Pi*physics.CellMeasure(m)*sum)) * physics.THzToKelvin
	if got := testmodels.ElasticTheta(t, m); testmodels.RelDiff(got, want) > 0.015 {
		t.Errorf("elastic θ_D %.3f K; Monte Carlo direction average %.3f K", got, want)
	}
}

// chainNuMaxTHz: the chain example (proto/examples/chain.json) has K = 1.5
// eV/Å², M = 40 amu, so ν_max = 2·sqrt(K/M) in units of sqrt(eV/Å²/amu)
// (Kittel, Introduction to Solid State Physics, ch. 4).
var chainNuMaxTHz = 2 * math.Sqrt(1.5/40) * physics.NuUnitTHz

// mustSpeedsATHz is the acoustic speeds of m along dir, without a deadline.
func mustSpeedsATHz(t testing.TB, m *physics.Model, dir [3]float64) []float64 {
	t.Helper()
	v, err := physics.AcousticSpeedsATHz(context.Background(), m, dir)
	if err != nil {
		t.Fatal(err)
	}
	return v
}
