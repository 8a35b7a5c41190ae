// Tests of the default paths: every recognised lattice type of every
// dimensionality has one, through built-in points only, and it samples.

package physics_test

import (
	"context"
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"

	"github.com/materials-lab/modegrid/physics/lattice"
)

// TestDefaultPathEveryLatticeType builds a model of each lattice type (1D,
// the five 2D nets, the recognised 3D types, in a non-standard basis where
// one is easy to write) and checks that its default path uses only
// built-in points and that Dispersion accepts it.
func TestDefaultPathEveryLatticeType(t *testing.T) {
	s3 := math.Sqrt(3)
	cases := []struct {
		name string
		vecs [][3]float64
		want string
	}{
		{"1d", [][3]float64{{2.5, 0, 0}}, lattice.Linear},
		{"square", [][3]float64{{3, 0, 0}, {3, 3, 0}}, lattice.Square},
		{"rectangular", [][3]float64{{3, 0, 0}, {0, 5, 0}}, lattice.Rectangular},
		{"centred rectangular (rhombic reduced cell)", [][3]float64{{3, 0, 0}, {1.5, 4, 0}}, lattice.CentredRect},
		{"centred rectangular (half projection)", [][3]float64{{3, 0, 0}, {-1.5, 2, 0}}, lattice.CentredRect},
		{"hexagonal 2D (honeycomb/triangular net)", [][3]float64{{2.46, 0, 0}, {-1.23, 1.23 * s3, 0}}, lattice.Hexagonal},
		{"oblique", [][3]float64{{3, 0, 0}, {1, 4, 0}}, lattice.Oblique},
		{"oblique obtuse basis", [][3]float64{{3, 0, 0}, {-1, 4, 0}}, lattice.Oblique},
		{"sc", [][3]float64{{3, 0, 0}, {0, 3, 0}, {0, 0, 3}}, lattice.SC},
		{"fcc", [][3]float64{{0, 2, 2}, {2, 0, 2}, {2, 4, 2}}, lattice.FCC},
		{"bcc", [][3]float64{{3, 0, 0}, {0, 3, 0}, {1.5, 1.5, 1.5}}, lattice.BCC},
		{"hexagonal 3D", [][3]float64{{1.5, -1.5 * s3, 0}, {1.5, 1.5 * s3, 0}, {0, 0, 5}}, lattice.Hexagonal},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m := withSpringLattice(t, tc.vecs...)
			if got := m.LatticeType(); got != tc.want {
				t.Fatalf("LatticeType = %q; want %q", got, tc.want)
			}
			path := m.DefaultPath()
			if len(path) < 2 {
				t.Fatalf("DefaultPath = %v; want at least two corners", path)
			}
			std := m.StandardPoints()
			seen := map[string]bool{}
			for i, c := range path {
				if _, ok := std[c.Label]; !ok {
					t.Errorf("corner %d: label %q is not built in (have %v)", i, c.Label, std)
				}
				seen[c.Label] = true
			}
			for label := range std {
				if !seen[label] {
					t.Errorf("built-in point %s is not on the default path %v", label, path)
				}
			}
			s, err := m.Dispersion(context.Background(), path, physics.PathOptions{Points: 4 * len(path)})
			if err != nil {
				t.Fatalf("Dispersion of the default path: %v", err)
			}
			if len(s) != 4*len(path) {
				t.Errorf("%d samples; want %d", len(s), 4*len(path))
			}
		})
	}
	// An unrecognised 3D lattice has no default path (the caller must give
	// coordinates).
	if p := withSpringLattice(t, [3]float64{3, 0, 0}, [3]float64{0, 4, 0}, [3]float64{0, 0, 5}).DefaultPath(); p != nil {
		t.Errorf("orthorhombic DefaultPath = %v; want nil", p)
	}
}

// TestCentredRectObliquePoints: the built-in points of the centred
// rectangular and oblique nets are midpoints of zone edges (derived: q is
// on the perpendicular bisector of G = 2q, which is a reciprocal lattice
// vector exactly when 2q has integer coordinates, and q is in the closed
// first zone when no reciprocal vector G' has q·G' > |G'|²/2).
func TestCentredRectObliquePoints(t *testing.T) {
	for _, vecs := range [][][3]float64{
		{{3, 0, 0}, {1.5, 4, 0}}, {{3, 0, 0}, {-1.5, 2, 0}}, {{3, 0, 0}, {1, 4, 0}}, {{3, 0, 0}, {-1, 4, 0}}, {{2, 1, 0}, {-1, 3.5, 0}},
	} {
		m := withLattice(vecs...)
		for label, q := range m.StandardPoints() {
			if label == "G" {
				continue
			}
			qc := m.CartQ(q)
			for h := -3; h <= 3; h++ {
				for k := -3; k <= 3; k++ {
					g := m.CartQ([3]float64{float64(h), float64(k), 0})
					if lattice.Dot(qc, g) > lattice.Dot(g, g)/2*(1+1e-12) {
						t.Errorf("%v %s = %v is outside the first zone (beyond the bisector of (%d,%d))", vecs, label, q, h, k)
					}
				}
			}
			for k := 0; k < 2; k++ {
				if 2*q[k] != math.Round(2*q[k]) {
					t.Errorf("%v %s = %v: 2q is not a reciprocal lattice vector, so q is not an edge midpoint", vecs, label, q)
				}
			}
		}
	}
}

// withSpringLattice is a one-site crystal with nearest-neighbour springs on
// the given lattice, so that it has frequencies to sample.
func withSpringLattice(t *testing.T, vecs ...[3]float64) *physics.Model {
	t.Helper()
	c := &physics.Crystal{
		Lattice: vecs,
		Sites:   []physics.Site{{Label: "A", MassAmu: 12, Frac: make([]float64, len(vecs))}},
		Shells:  []physics.Shell{{FromLabel: "A", ToLabel: "A", Shell: 1, KLong: 1, KTrans: 0.2}},
	}
	return testmodels.Compile(t, c)
}
