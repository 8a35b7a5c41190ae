// Tests of lattice-type recognition and the built-in standard points.

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

// withLattice is a one-site crystal on the given lattice (no springs: the
// lattice type needs none).
func withLattice(vecs ...[3]float64) *physics.Model {
	c := &physics.Crystal{Lattice: vecs, Sites: []physics.Site{{Label: "A", MassAmu: 1, Frac: make([]float64, len(vecs))}}}
	m, err := physics.Compile(context.Background(), c, physics.Options{})
	if err != nil {
		panic(err)
	}
	return m
}

// TestStandardPointsSetting: in the standard setting the built-in points
// are the fractional coordinates of Setyawan & Curtarolo (2010) — recalled
// from the paper's tables (from memory) and checked here against the
// Cartesian zone points as they are usually labelled (common practice):
// fcc X = (2π/a)(0,1,0), L = (π/a)(1,1,1), W = (2π/a)(½,1,0),
// K = (2π/a)(¾,¾,0), U = (2π/a)(¼,1,¼); bcc H = (2π/a)(0,1,0),
// P = (π/a)(1,1,1), N = (π/a)(1,1,0); sc X = (π/a)(0,1,0), M = (π/a)(1,1,0),
// R = (π/a)(1,1,1); hexagonal K = (4π/3a)(1,0,0), M = b₁/2, A = (π/c)ẑ
// with a₁ = (a/2, −a√3/2, 0); and the 2D and 1D analogues.
func TestStandardPointsSetting(t *testing.T) {
	s3 := math.Sqrt(3)
	const a = 4.0
	type pt struct {
		label string
		cart  [3]float64 // in units of 2π/a
	}
	cases := []struct {
		name string
		vecs [][3]float64
		pts  []pt
	}{
		{"sc", [][3]float64{{a, 0, 0}, {0, a, 0}, {0, 0, a}},
			[]pt{{"X", [3]float64{0, 0.5, 0}}, {"M", [3]float64{0.5, 0.5, 0}}, {"R", [3]float64{0.5, 0.5, 0.5}}}},
		{"fcc", [][3]float64{{0, a / 2, a / 2}, {a / 2, 0, a / 2}, {a / 2, a / 2, 0}},
			[]pt{{"X", [3]float64{0, 1, 0}}, {"L", [3]float64{0.5, 0.5, 0.5}}, {"W", [3]float64{0.5, 1, 0}},
				{"K", [3]float64{0.75, 0.75, 0}}, {"U", [3]float64{0.25, 1, 0.25}}}},
		{"bcc", [][3]float64{{-a / 2, a / 2, a / 2}, {a / 2, -a / 2, a / 2}, {a / 2, a / 2, -a / 2}},
			[]pt{{"H", [3]float64{0, 1, 0}}, {"P", [3]float64{0.5, 0.5, 0.5}}, {"N", [3]float64{0.5, 0.5, 0}}}},
		{"hexagonal", [][3]float64{{a / 2, -a * s3 / 2, 0}, {a / 2, a * s3 / 2, 0}, {0, 0, 6}},
			[]pt{{"K", [3]float64{2.0 / 3, 0, 0}}, {"M", [3]float64{0.5, -0.5 / s3, 0}}, {"A", [3]float64{0, 0, a / 12}}}},
		{"square", [][3]float64{{a, 0, 0}, {0, a, 0}}, []pt{{"X", [3]float64{0.5, 0, 0}}, {"M", [3]float64{0.5, 0.5, 0}}}},
		{"rectangular", [][3]float64{{a, 0, 0}, {0, 2 * a, 0}},
			[]pt{{"X", [3]float64{0.5, 0, 0}}, {"Y", [3]float64{0, 0.25, 0}}, {"S", [3]float64{0.5, 0.25, 0}}}},
		{"hexagonal 2D", [][3]float64{{a / 2, -a * s3 / 2, 0}, {a / 2, a * s3 / 2, 0}}, []pt{{"K", [3]float64{2.0 / 3, 0, 0}}}},
		{"1d", [][3]float64{{a, 0, 0}}, []pt{{"X", [3]float64{0.5, 0, 0}}}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m := withLattice(tc.vecs...)
			std := m.StandardPoints()
			if std["G"] != ([3]float64{}) {
				t.Errorf("G = %v", std["G"])
			}
			for _, p := range tc.pts {
				q, ok := std[p.label]
				if !ok {
					t.Fatalf("no point %s in %v", p.label, std)
				}
				got := m.CartQ(q)
				for x := 0; x < 3; x++ {
					if math.Abs(got[x]-p.cart[x]*2*math.Pi/a) > 1e-12 {
						t.Errorf("%s = %v (frac %v); want %v·2π/a", p.label, got, q, p.cart)
						break
					}
				}
			}
			if want := len(lattice.StandardFrac(m.LatticeType())); tc.name != "hexagonal 2D" && len(std) != want {
				t.Errorf("%d points; want %d", len(std), want)
			}
		})
	}
	// The fcc example is in the standard setting: X and L are the paper's
	// numbers exactly.
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	if x, l := m.StandardPoints()["X"], m.StandardPoints()["L"]; x != [3]float64{0.5, 0, 0.5} || l != [3]float64{0.5, 0.5, 0.5} {
		t.Errorf("fcc example X = %v, L = %v", x, l)
	}
}

// TestStandardPointsAnySetting: in a rotated lattice the fractional
// coordinates do not change; in another primitive basis of the same fcc
// lattice the points are still the zone's X, L, W, K (same frequencies in
// the NN model, whose closed forms are in TestFCCNearestNeighbour*).
func TestStandardPointsAnySetting(t *testing.T) {
	rng := rand.New(rand.NewPCG(43, 3))
	c := testmodels.Load(t, "fcc")
	ref := testmodels.Compile(t, c)
	rot := testmodels.Compile(t, testmodels.Rotated(c, testmodels.RandomRotation(rng)))
	for label, q := range ref.StandardPoints() {
		if got := rot.StandardPoints()[label]; math.Abs(got[0]-q[0])+math.Abs(got[1]-q[1])+math.Abs(got[2]-q[2]) > 1e-9 {
			t.Errorf("rotated %s = %v; want %v", label, got, q)
		}
	}
	other := testmodels.Clone(c)
	other.Lattice = [][3]float64{{0, 2, 2}, {2, 0, 2}, {2, 4, 2}}
	om := testmodels.Compile(t, other)
	if om.LatticeType() != lattice.FCC {
		t.Fatalf("type %q", om.LatticeType())
	}
	for _, label := range []string{"X", "L", "W", "K", "U"} {
		got := om.FrequenciesTHz(om.StandardPoints()[label])
		want := ref.FrequenciesTHz(ref.StandardPoints()[label])
		if !testmodels.CloseSlices(got, want, 1e-10) {
			t.Errorf("%s in another basis: %v; want %v", label, got, want)
		}
	}
}
