package qha_test

import (
	"context"
	"math"
	"testing"
	"time"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/thermo/qha"
)

// scCrystal is a simple cubic crystal of lattice constant aA (Å), one site
// of mass massAmu, central springs k1 to the 6 nearest and k2 to the 12
// next-nearest neighbours (eV/Å²). With k1 = k2 its long waves are
// elastically isotropic: C11 = (k1 + 2k2)/a, C12 = C44 = k2/a, and
// 2C44 = C11 − C12 (Born & Huang, Dynamical Theory of Crystal Lattices,
// ch. II; derived from the spring energies).
func scCrystal(aA, massAmu, k1, k2 float64) *physics.Crystal {
	c := &physics.Crystal{
		Lattice:       [][3]float64{{aA, 0, 0}, {0, aA, 0}, {0, 0, aA}},
		Polarizations: 3,
		Sites:         []physics.Site{{Label: "A", MassAmu: massAmu, Frac: []float64{0, 0, 0}}},
	}
	for _, n := range [][]int{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}} {
		c.Springs = append(c.Springs, physics.Spring{From: 0, To: 0, Cell: n, KLong: k1})
	}
	if k2 != 0 {
		for _, n := range [][]int{{1, 1, 0}, {1, -1, 0}, {1, 0, 1}, {1, 0, -1}, {0, 1, 1}, {0, 1, -1}} {
			c.Springs = append(c.Springs, physics.Spring{From: 0, To: 0, Cell: n, KLong: k2})
		}
	}
	return c
}

// twoLattices is two interpenetrating simple cubic lattices that do not
// interact: site A (mass 20 amu, springs kA) and site B (mass 70 amu,
// springs kB, at the cube centre), each with nearest- and next-nearest
// neighbour springs to its own kind only. Every mode moves one kind
// alone, so scaling kA and kB with different powers of the volume gives
// each mode the γ of its kind, while the two kinds' frequency ranges
// overlap and their branches cross between volumes.
func twoLattices(aA, kA, kB float64) *physics.Crystal {
	c := &physics.Crystal{
		Lattice:       [][3]float64{{aA, 0, 0}, {0, aA, 0}, {0, 0, aA}},
		Polarizations: 3,
		Sites: []physics.Site{{Label: "A", MassAmu: 20, Frac: []float64{0, 0, 0}},
			{Label: "B", MassAmu: 70, Frac: []float64{0.5, 0.5, 0.5}}},
	}
	cells := [][]int{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}, {1, 1, 0}, {1, -1, 0}, {1, 0, 1}, {1, 0, -1}, {0, 1, 1}, {0, 1, -1}}
	for s, k := range []float64{kA, kB} {
		for _, n := range cells {
			c.Springs = append(c.Springs, physics.Spring{From: s, To: s, Cell: n, KLong: k, KTrans: 0.1 * k})
		}
	}
	return c
}

func compile(t testing.TB, c *physics.Crystal) *physics.Model {
	t.Helper()
	m, err := physics.Compile(context.Background(), c, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// powerLawSet is the sc crystal at volumes V0·(1+d)³ for each d in dx
// (linear strains), its springs scaled as k ∝ V^(−s).
func powerLawSet(t testing.TB, a0, s float64, dx []float64) []*physics.Model {
	t.Helper()
	v0 := a0 * a0 * a0
	var ms []*physics.Model
	for _, d := range dx {
		a := a0 * (1 + d)
		f := math.Pow(a*a*a/v0, -s)
		ms = append(ms, compile(t, scCrystal(a, 40, 2*f, 2*f)))
	}
	return ms
}

func ctx(t testing.TB) context.Context {
	c, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	t.Cleanup(cancel)
	return c
}

func mustSet(t testing.TB, ms []*physics.Model, ref int) *qha.VolumeSet {
	t.Helper()
	set, err := qha.NewVolumeSet(ms, ref)
	if err != nil {
		t.Fatal(err)
	}
	return set
}

func rel(a, b float64) float64 {
	if a == b {
		return 0
	}
	return math.Abs(a-b) / math.Max(math.Abs(a), math.Abs(b))
}
