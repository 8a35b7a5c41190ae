// Tests of group and sound velocities.

package physics_test

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"

	"github.com/materials-lab/modegrid/physics/mesh"
)

// crossingChains is a 1D crystal of two uncoupled chains of mass M: chain A
// with nearest-neighbour springs K, chain B with springs K to the second
// cell. ω_A = 2 sqrt(K/M)|sin πq| and ω_B = 2 sqrt(K/M)|sin 2πq| (Kittel
// ch. 4, monatomic chain, for periods a and 2a) cross at q = 1/3.
func crossingChains() *physics.Crystal {
	return &physics.Crystal{
		Lattice:       [][3]float64{{3, 0, 0}},
		Polarizations: 1,
		Sites: []physics.Site{
			{Label: "A", MassAmu: 10, Frac: []float64{0}},
			{Label: "B", MassAmu: 10, Frac: []float64{0.5}},
		},
		Springs: []physics.Spring{
			{From: 0, To: 0, Cell: []int{1}, KLong: 2},
			{From: 1, To: 1, Cell: []int{2}, KLong: 2},
		},
	}
}

// TestChainGroupVelocity: v = dω/dq = a sqrt(K/M) cos(πq) for the
// monatomic chain (derivative of Kittel ch. 4's dispersion), in km/s.
func TestChainGroupVelocity(t *testing.T) {
	c := testmodels.Load(t, "chain")
	m := testmodels.Compile(t, c)
	a, K, M := c.Lattice[0][0], c.Springs[0].KLong, c.Sites[0].MassAmu
	for _, q := range []float64{0.05, 0.2, 0.35, -0.3, 0.5} {
		pm := m.Point([3]float64{q}, physics.ModeOptions{Velocities: true})
		want := a * math.Sqrt(K/M) * math.Cos(math.Pi*q) * physics.VelocityUnitKmS
		if q < 0 {
			want = -want // ω = 2 sqrt(K/M)|sin πq| falls towards q = 0⁻
		}
		if math.Abs(pm.VelKmS[0][0]-want) > 1e-10 || pm.VelKmS[0][1] != 0 || pm.VelKmS[0][2] != 0 {
			t.Errorf("q=%v: v = %v km/s; want (%.12g, 0, 0)", q, pm.VelKmS[0], want)
		}
	}
	// 1 Å·sqrt(eV/Å²/amu) = 9.82269475 km/s (from OmegaUnitRadPerS,
	// sqrt(e·10²⁰/m_u)·10⁻¹³ with CODATA 2018 e and m_u).
	if !relClose(physics.VelocityUnitKmS, 9.82269475025, 1e-9) {
		t.Errorf("VelocityUnitKmS = %v", physics.VelocityUnitKmS)
	}
}

// TestGroupVelocityFiniteDifference: on the rock-salt-like crystal at
// random q, Hellmann–Feynman velocities agree with central differences of
// the sorted frequencies (step 1e-5 Å⁻¹) for well separated branches.
func TestGroupVelocityFiniteDifference(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "rocksalt-like"))
	rng := rand.New(rand.NewPCG(31, 5))
	const h = 1e-5
	for _, q := range randomQs(rng, 5) {
		pm := m.Point(q, physics.ModeOptions{Velocities: true})
		for a := 0; a < 3; a++ {
			var dq [3]float64
			for k := 0; k < 3; k++ {
				dq[k] = h * m.Lattice()[k][a] / (2 * math.Pi)
			}
			fp := m.FrequenciesTHz([3]float64{q[0] + dq[0], q[1] + dq[1], q[2] + dq[2]})
			fm := m.FrequenciesTHz([3]float64{q[0] - dq[0], q[1] - dq[1], q[2] - dq[2]})
			for k := range fp {
				if (k > 0 && pm.FreqTHz[k]-pm.FreqTHz[k-1] < 1e-3) || (k < len(fp)-1 && pm.FreqTHz[k+1]-pm.FreqTHz[k] < 1e-3) {
					continue
				}
				// 2π Δν/Δq: THz·Å → km/s is 2π·1e12·1e-10/1e3.
				fd := 2 * math.Pi * (fp[k] - fm[k]) / (2 * h) * 1e-1
				if math.Abs(fd-pm.VelKmS[k][a]) > 1e-6*math.Max(1, math.Abs(fd)) {
					t.Fatalf("q=%v mode %d axis %d: Hellmann–Feynman %.10g km/s; difference %.10g", q, k, a, pm.VelKmS[k][a], fd)
				}
			}
		}
	}
}

// TestDegenerateVelocitiesFCC: along Γ–X of the fcc NN model the two
// transverse branches are degenerate; each must carry the analytic
// velocity (a/2) sqrt(K/M) cos(πξ/2) along the path, the longitudinal one
// a sqrt(K/2M) cos(πξ/2) (derivatives of ω_T = 2 sqrt(K/M) sin(πξ/2) and
// ω_L = 2√2 sqrt(K/M) sin(πξ/2) at q = (2π/a)ξ ŷ, from the NN dynamical
// matrix, Ashcroft & Mermin ch. 22), with no transverse component — for
// the default split direction and for the path direction.
func TestDegenerateVelocitiesFCC(t *testing.T) {
	c := testmodels.Load(t, "fcc")
	m := testmodels.Compile(t, c)
	K, M := c.Shells[0].KLong, c.Sites[0].MassAmu
	ac := 2 * c.Lattice[0][1] // cubic constant: a₁ = (0, a/2, a/2)
	X := m.StandardPoints()["X"]
	for _, dir := range [][3]float64{{}, {0, 1, 0}} {
		for _, xi := range []float64{0.1, 0.3, 0.55, 0.8} {
			q := [3]float64{xi * X[0], xi * X[1], xi * X[2]}
			pm := m.Point(q, physics.ModeOptions{Velocities: true, VelocityDir: dir})
			cos := math.Cos(math.Pi * xi / 2)
			want := []float64{ac / 2 * math.Sqrt(K/M) * cos, ac / 2 * math.Sqrt(K/M) * cos, ac * math.Sqrt(K/(2*M)) * cos}
			for k, w := range want {
				v := pm.VelKmS[k]
				if math.Abs(v[1]-w*physics.VelocityUnitKmS) > 1e-9 || math.Abs(v[0]) > 1e-9 || math.Abs(v[2]) > 1e-9 {
					t.Errorf("dir %v ξ=%v mode %d: v = %v; want (0, %.10g, 0)", dir, xi, k, v, w*physics.VelocityUnitKmS)
				}
			}
		}
	}
}

// TestVelocitiesAtACrossing: at the crossing q = 1/3 of two uncoupled
// chains the modes are degenerate; splitting the degenerate subspace along
// the chain gives each branch its own slope, a sqrt(K/M) cos(πq) and
// 2a sqrt(K/M) cos(2πq) (derivatives of the two chain dispersions), not
// their mixture.
func TestVelocitiesAtACrossing(t *testing.T) {
	c := crossingChains()
	m := testmodels.Compile(t, c)
	a, K, M := c.Lattice[0][0], c.Springs[0].KLong, c.Sites[0].MassAmu
	q := 1.0 / 3
	pm := m.Point([3]float64{q}, physics.ModeOptions{Velocities: true, Eigenvectors: true})
	if math.Abs(pm.FreqTHz[0]-pm.FreqTHz[1]) > 1e-9 {
		t.Fatalf("not degenerate at q = 1/3: %v", pm.FreqTHz)
	}
	vA := a * math.Sqrt(K/M) * math.Cos(math.Pi*q) * physics.VelocityUnitKmS
	vB := 2 * a * math.Sqrt(K/M) * math.Cos(2*math.Pi*q) * physics.VelocityUnitKmS
	got := []float64{pm.VelKmS[0][0], pm.VelKmS[1][0]}
	if !(math.Abs(got[0]-vB) < 1e-9 && math.Abs(got[1]-vA) < 1e-9) {
		t.Errorf("velocities %v; want {%v, %v} (sorted by slope)", got, vB, vA)
	}
	// The returned eigenvectors are the split ones: pure chain B, pure A.
	if math.Abs(real(pm.Eigvecs[1])*real(pm.Eigvecs[1])+imag(pm.Eigvecs[1])*imag(pm.Eigvecs[1])-1) > 1e-9 {
		t.Errorf("mode 0 should live on site B: %v", pm.Eigvecs[:2])
	}
}

// TestSoundVelocities: slopes of the acoustic branches at Γ: the chain
// a sqrt(K/M) (Kittel ch. 4 long-wavelength limit); fcc NN along [100],
// longitudinal a sqrt(K/2M) and twice transverse (a/2) sqrt(K/M) (long-
// wavelength limit of the NN dynamical matrix, D ≈ (K/M) a²q²
// diag(½, ¼, ¼); Ashcroft & Mermin ch. 22).
func TestSoundVelocities(t *testing.T) {
	c := testmodels.Load(t, "chain")
	m := testmodels.Compile(t, c)
	a, K, M := c.Lattice[0][0], c.Springs[0].KLong, c.Sites[0].MassAmu
	got := testmodels.Sound(t, m, [3]float64{1, 0, 0})
	if want := a * math.Sqrt(K/M) * physics.VelocityUnitKmS; len(got) != 1 || !relClose(got[0], want, 1e-13) {
		t.Errorf("chain: %v; want %v", got, want)
	}
	// A direction with components off the chain axis is projected onto it.
	if g2 := testmodels.Sound(t, m, [3]float64{1, 5, 0}); len(g2) != 1 || !relClose(g2[0], got[0], 1e-12) {
		t.Errorf("chain, oblique direction: %v; want %v", g2, got)
	}
	if g3 := testmodels.Sound(t, m, [3]float64{0, 1, 0}); g3 != nil {
		t.Errorf("direction normal to the chain: %v; want nil", g3)
	}

	c = testmodels.Load(t, "fcc")
	m = testmodels.Compile(t, c)
	K, M = c.Shells[0].KLong, c.Sites[0].MassAmu
	ac := 2 * c.Lattice[0][1]
	got = testmodels.Sound(t, m, [3]float64{1, 0, 0})
	want := []float64{ac / 2 * math.Sqrt(K/M), ac / 2 * math.Sqrt(K/M), ac * math.Sqrt(K/(2*M))}
	for k, w := range want {
		if !relClose(got[k], w*physics.VelocityUnitKmS, 1e-13) {
			t.Errorf("fcc [100] branch %d: %.12g km/s; want %.12g", k, got[k], w*physics.VelocityUnitKmS)
		}
	}
	// In the N/m model of the same physics, the same speeds to rounding.
	if g := testmodels.Sound(t, testmodels.Compile(t, testmodels.InNPerM(c)), [3]float64{1, 0, 0}); !testmodels.CloseSlices(g, got, 1e-13) {
		t.Errorf("N/m model: %v; want %v", g, got)
	}
}

// TestVelocitiesAtGamma: at Γ the acoustic modes get velocity 0 (their
// slope depends on the direction, see SoundVelocities) and, in these
// centrosymmetric crystals, so do the optical ones (ω(q) = ω(−q) makes
// ∂ω/∂q vanish at Γ; common practice); all finite.
func TestVelocitiesAtGamma(t *testing.T) {
	for _, name := range []string{"fcc", "rocksalt-like", "chain", "square-net"} {
		m := testmodels.Compile(t, testmodels.Load(t, name))
		pm := m.Point([3]float64{}, physics.ModeOptions{Velocities: true})
		for k, v := range pm.VelKmS {
			for _, x := range v {
				if math.IsNaN(x) || math.Abs(x) > 1e-9 {
					t.Errorf("%s mode %d at Γ: v = %v", name, k, v)
				}
			}
		}
	}
}

// TestVelocitiesFiniteAtNearDegeneracy: a nearly degenerate optical pair at
// Γ whose ∂D/∂q is ~1e-160 (sites displaced by 1e-153 from a centre of
// inversion) must give finite group velocities — found by fuzzing; group
// velocities vanish at Γ by time reversal and inversion to that order
// (common practice).
func TestVelocitiesFiniteAtNearDegeneracy(t *testing.T) {
	c := &physics.Crystal{Lattice: [][3]float64{{0, 2.8, 2.8}, {2.8, 0, 2.8}, {2.8, 2.8, 0}}, ForceUnit: physics.NPerM,
		Sites: []physics.Site{
			{Label: "P", MassAmu: 25, Frac: []float64{0, 1.1933345169920331e-153, 1.207373746603704e-153}},
			{Label: "Q", MassAmu: 1060912.2155791053, Frac: []float64{0, 0.5, 0.5}},
		},
		Shells: []physics.Shell{{FromLabel: "P", ToLabel: "Q", Shell: 1, KLong: 1060912.188235294, KTrans: 16.188250612511354}}}
	m := testmodels.Compile(t, c)
	err := m.StreamModes(context.Background(), []mesh.QPoint{{}}, physics.ModeOptions{Velocities: true}, func(ch physics.ModeChunk) error {
		for k, v := range ch.Points[0].VelKmS {
			for a, x := range v {
				if math.IsNaN(x) || math.IsInf(x, 0) || math.Abs(x) > 1e-9 {
					t.Errorf("mode %d component %d: velocity %v km/s; want ~0 and finite", k, a, x)
				}
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}
