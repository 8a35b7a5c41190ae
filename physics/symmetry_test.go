package physics_test

import (
	"context"
	"math"
	"math/cmplx"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/lattice"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// TestSymmetryOperationCounts: point-group orders of the example crystals.
// A cubic crystal with one site (or the two-site rock-salt arrangement) has
// the full cubic group O_h of order 48; the square net with in-plane
// motion has the 8 operations of 4mm; a chain has x → ±x (International
// Tables for Crystallography, Vol. A, point-group tables).
func TestSymmetryOperationCounts(t *testing.T) {
	cases := []struct {
		name string
		want int
	}{
		{"fcc", 48},
		{"rocksalt-like", 48},
		{"square-net", 8},
		{"chain", 2},
		{"diatomic-chain", 2},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m := testmodels.Compile(t, testmodels.Load(t, tc.name))
			ops := testmodels.Symmetry(t, m)
			if len(ops) != tc.want {
				t.Fatalf("got %d operations; want %d", len(ops), tc.want)
			}
			if ops[0].Rot != lattice.Identity() {
				t.Errorf("first operation is %v; want the identity", ops[0].Rot)
			}
		})
	}
}

func TestSymmetryBrokenAndTriclinic(t *testing.T) {
	if n := len(testmodels.Symmetry(t, testmodels.Compile(t, testmodels.Triclinic()))); n != 1 {
		t.Errorf("triclinic: %d operations; want 1 (identity)", n)
	}
	// The bond a1 = (0, 2, 2) is kept (up to sign) by the operations of the
	// cubic group fixing the axis [011] up to sign: a group of order 8 (mmm
	// with a twofold axis along [011]; International Tables Vol. A).
	if n := len(testmodels.Symmetry(t, testmodels.Compile(t, testmodels.BrokenFCC(t)))); n != 8 {
		t.Errorf("fcc with one extra bond: %d operations; want 8", n)
	}
}

// TestIrreducibleCountsFCC compares the irreducible-point counts of
// Γ-centred N×N×N grids of the fcc example with an independent brute-force
// enumeration: each grid point is turned into a Cartesian wavevector, hit
// with all 48 signed 3×3 permutation matrices (the cubic group O_h written
// out directly, not found from the lattice) and ±, mapped back to grid
// indices, and the points are grouped by their smallest image. From
// memory: 8 points for N = 4 and 29 for N = 8.
func TestIrreducibleCountsFCC(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	sizes := []int{4, 8, 16, 48}
	if testing.Short() {
		sizes = sizes[:3]
	}
	for _, n := range sizes {
		ir, err := m.ReduceGrid(context.Background(), mesh.GridSpec{Mesh: [3]int{n, n, n}}, nil)
		if err != nil {
			t.Fatal(err)
		}
		want := bruteForceCubicOrbits(m, n)
		if len(ir.Irr) != want {
			t.Errorf("N=%d: %d irreducible points; brute force gives %d", n, len(ir.Irr), want)
		}
		total := 0
		for _, k := range ir.Mult {
			total += k
		}
		if total != n*n*n {
			t.Errorf("N=%d: multiplicities sum to %d; want %d", n, total, n*n*n)
		}
		switch n {
		case 4:
			if len(ir.Irr) != 8 {
				t.Errorf("N=4: %d points; want 8 (from memory)", len(ir.Irr))
			}
		case 8:
			if len(ir.Irr) != 29 {
				t.Errorf("N=8: %d points; want 29 (from memory)", len(ir.Irr))
			}
		}
	}
}

func bruteForceCubicOrbits(m *physics.Model, n int) int {
	a, b := m.Lattice(), m.Reciprocal()
	var mats [][3][3]float64
	perms := [][3]int{{0, 1, 2}, {0, 2, 1}, {1, 0, 2}, {1, 2, 0}, {2, 0, 1}, {2, 1, 0}}
	for _, p := range perms {
		for s := 0; s < 8; s++ {
			var r [3][3]float64
			for i := 0; i < 3; i++ {
				sign := 1.0
				if s>>i&1 == 1 {
					sign = -1
				}
				r[i][p[i]] = sign
			}
			mats = append(mats, r)
		}
	}
	idx := func(q [3]float64) int {
		var c [3]int
		for k := 0; k < 3; k++ {
			x := int(math.Round(q[k]*float64(n))) % n
			if x < 0 {
				x += n
			}
			c[k] = x
		}
		return (c[0]*n+c[1])*n + c[2]
	}
	seen := map[int]bool{}
	count := 0
	for i := 0; i < n*n*n; i++ {
		q := [3]float64{float64(i/(n*n)) / float64(n), float64(i/n%n) / float64(n), float64(i%n) / float64(n)}
		var k [3]float64 // Cartesian
		for l := 0; l < 3; l++ {
			for x := 0; x < 3; x++ {
				k[x] += q[l] * b[l][x]
			}
		}
		best := i
		for _, r := range mats {
			var kr [3]float64
			for x := 0; x < 3; x++ {
				for y := 0; y < 3; y++ {
					kr[x] += r[x][y] * k[y]
				}
			}
			for _, sign := range []float64{1, -1} {
				var qf [3]float64
				for l := 0; l < 3; l++ {
					qf[l] = sign * lattice.Dot(kr, a[l]) / (2 * math.Pi)
				}
				if j := idx(qf); j < best {
					best = j
				}
			}
		}
		if !seen[best] {
			seen[best] = true
			count++
		}
	}
	return count
}

// TestReducedEqualsFull: modes computed on the irreducible points and
// unfolded equal those computed on every point — frequencies, site weights
// and eigenvectors (as projectors e e†, which are basis-independent only
// for non-degenerate modes; checked through D e = λ e instead) — on every
// example, the triclinic model and the symmetry-broken cubic model.
func TestReducedEqualsFull(t *testing.T) {
	type tc struct {
		name string
		c    *physics.Crystal
		mesh [3]int
		sh   bool
	}
	var cases []tc
	for _, name := range testmodels.Names(t) {
		c := testmodels.Load(t, name)
		mesh := [3]int{6, 1, 1}
		switch len(c.Lattice) {
		case 2:
			mesh = [3]int{6, 6, 1}
		case 3:
			mesh = [3]int{4, 4, 4}
		}
		cases = append(cases, tc{name, c, mesh, false}, tc{name + "/shifted", c, mesh, true})
	}
	cases = append(cases, tc{"triclinic", testmodels.Triclinic(), [3]int{3, 4, 5}, false}, tc{"fcc+bond", testmodels.BrokenFCC(t), [3]int{4, 4, 4}, false})
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			m := testmodels.Compile(t, c.c)
			spec := mesh.GridSpec{Mesh: c.mesh, Shifted: c.sh}
			opt := physics.GridOptions{Projections: true, Eigenvectors: true, SiteTensors: true}
			red, err := m.GridModes(context.Background(), spec, opt)
			if err != nil {
				t.Fatal(err)
			}
			opt.NoSymmetry = true
			full, err := m.GridModes(context.Background(), spec, opt)
			if err != nil {
				t.Fatal(err)
			}
			nm := full.NModes
			if red.Diagonalized >= full.Diagonalized && len(full.Points) > 2 {
				t.Errorf("reduced path diagonalised %d points, full %d", red.Diagonalized, full.Diagonalized)
			}
			for i := range full.SiteWeight {
				if math.Abs(full.SiteWeight[i]-red.SiteWeight[i]) > 1e-10 {
					t.Fatalf("site weight %d: full %v reduced %v", i, full.SiteWeight[i], red.SiteWeight[i])
				}
			}
			for i := range full.SiteTensor {
				if math.Abs(full.SiteTensor[i]-red.SiteTensor[i]) > 1e-10 {
					t.Fatalf("site tensor %d: full %v reduced %v", i, full.SiteTensor[i], red.SiteTensor[i])
				}
			}
			for i := range full.FreqTHz {
				if math.Abs(full.FreqTHz[i]-red.FreqTHz[i]) > 1e-10*math.Max(1, math.Abs(full.FreqTHz[i])) {
					t.Fatalf("freq %d: full %v reduced %v", i, full.FreqTHz[i], red.FreqTHz[i])
				}
			}
			// Site weights summed over each degenerate group are basis-free.
			for p := range full.Points {
				for k := 0; k < nm; {
					e := k
					for e+1 < nm && math.Abs(full.FreqTHz[p*nm+e+1]-full.FreqTHz[p*nm+k]) < 1e-6 {
						e++
					}
					for s := 0; s < full.NSites; s++ {
						var a, b float64
						for j := k; j <= e; j++ {
							a += full.SiteWeight[(p*nm+j)*full.NSites+s]
							b += red.SiteWeight[(p*nm+j)*full.NSites+s]
						}
						if math.Abs(a-b) > 1e-9 {
							t.Fatalf("point %d modes %d–%d site %d: weight %v vs %v", p, k, e, s, a, b)
						}
					}
					k = e + 1
				}
				// Unfolded eigenvectors are eigenvectors of D at that point.
				d := m.DynamicalMatrix(full.Points[p].Q, nil)
				for k := 0; k < nm; k++ {
					lam := full.FreqTHz[p*nm+k] / physics.NuUnitTHz
					lam = math.Copysign(lam*lam, lam)
					for r := 0; r < nm; r++ {
						var s complex128
						for c := 0; c < nm; c++ {
							s += d[r*nm+c] * red.Eigvecs[(p*nm+k)*nm+c]
						}
						if cmplx.Abs(s-complex(lam, 0)*red.Eigvecs[(p*nm+k)*nm+r]) > 1e-8 {
							t.Fatalf("point %d mode %d: unfolded eigenvector residual %g", p, k, cmplx.Abs(s-complex(lam, 0)*red.Eigvecs[(p*nm+k)*nm+r]))
						}
					}
				}
			}
		})
	}
}
