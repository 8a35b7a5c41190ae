package transport

import (
	"context"
	"math"
	"testing"
	"time"

	"github.com/materials-lab/modegrid/physics"
)

// isoCrystal is a simple cubic crystal (lattice constant aA Å, one site
// of mass massAmu amu, label "X") with equal central springs k (eV/Å²) to
// its 6 nearest and 12 next-nearest neighbours. Its long waves are
// elastically isotropic: from the spring energies C11 = (k1 + 2k2)/a = 3k/a,
// C12 = C44 = k2/a = k/a, so 2C44 = C11 − C12 (Born & Huang, Dynamical
// Theory of Crystal Lattices, ch. II), and with ρ = m/a³ the sound
// velocities are c_L² = 3ka²/m and c_T² = ka²/m in every direction.
func isoCrystal(aA, massAmu, k float64, label string) *physics.Crystal {
	c := &physics.Crystal{
		Lattice:       [][3]float64{{aA, 0, 0}, {0, aA, 0}, {0, 0, aA}},
		Polarizations: 3,
		Sites:         []physics.Site{{Label: label, MassAmu: massAmu, Frac: []float64{0, 0, 0}}},
	}
	for _, n := range [][]int{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}, {1, 1, 0}, {1, -1, 0}, {1, 0, 1}, {1, 0, -1}, {0, 1, 1}, {0, 1, -1}} {
		c.Springs = append(c.Springs, physics.Spring{From: 0, To: 0, Cell: n, KLong: k})
	}
	return c
}

// isoSpeeds are c_L and c_T of isoCrystal in m/s (see there): k in eV/Å²
// is k·e/10⁻²⁰ N/m, m in kg, a in m.
func isoSpeeds(aA, massAmu, k float64) (cL, cT float64) {
	kSI := k * physics.ElementaryChargeC / 1e-20
	mSI := massAmu * physics.AtomicMassKg
	a := aA * 1e-10
	return math.Sqrt(3 * kSI * a * a / mSI), math.Sqrt(kSI * a * a / mSI)
}

func compile(t testing.TB, c *physics.Crystal) *physics.Model {
	t.Helper()
	m, err := physics.Compile(context.Background(), c, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func testCtx(t testing.TB) context.Context {
	c, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	t.Cleanup(cancel)
	return c
}

// slope is the least-squares slope of ln y against ln x.
func slope(x, y []float64) float64 {
	var sx, sy, sxx, sxy float64
	n := float64(len(x))
	for i := range x {
		lx, ly := math.Log(x[i]), math.Log(y[i])
		sx, sy, sxx, sxy = sx+lx, sy+ly, sxx+lx*lx, sxy+lx*ly
	}
	return (n*sxy - sx*sy) / (n*sxx - sx*sx)
}
