// Tests of lattice-type recognition, the vector helpers and the point
// group.

package lattice

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestDetect recognises each type from its vectors in any primitive
// basis and orientation, and nothing else.
func TestDetect(t *testing.T) {
	s3 := math.Sqrt(3)
	rng := rand.New(rand.NewPCG(41, 1))
	r := randomRotation(rng)
	rot := func(vs ...[3]float64) [][3]float64 {
		out := make([][3]float64, len(vs))
		for i, v := range vs {
			out[i] = rotate3(r, v)
		}
		return out
	}
	cases := []struct {
		name string
		vecs [][3]float64
		want string
	}{
		{"sc", [][3]float64{{3, 0, 0}, {0, 3, 0}, {0, 0, 3}}, SC},
		{"sc skewed basis", [][3]float64{{3, 0, 0}, {3, 3, 0}, {-3, 3, 3}}, SC},
		{"fcc standard", [][3]float64{{0, 2, 2}, {2, 0, 2}, {2, 2, 0}}, FCC},
		{"fcc other basis", [][3]float64{{0, 2, 2}, {2, 0, 2}, {2, 4, 2}}, FCC},
		{"fcc rotated", rot([3]float64{0, 2, 2}, [3]float64{2, 0, 2}, [3]float64{2, 2, 0}), FCC},
		{"bcc standard", [][3]float64{{-1.5, 1.5, 1.5}, {1.5, -1.5, 1.5}, {1.5, 1.5, -1.5}}, BCC},
		{"bcc cube-edge basis", [][3]float64{{3, 0, 0}, {0, 3, 0}, {1.5, 1.5, 1.5}}, BCC},
		{"hexagonal standard", [][3]float64{{1.5, -1.5 * s3, 0}, {1.5, 1.5 * s3, 0}, {0, 0, 5}}, Hexagonal},
		{"hexagonal 60° short c", rot([3]float64{3, 0, 0}, [3]float64{1.5, 1.5 * s3, 0}, [3]float64{0, 0, 2}), Hexagonal},
		{"tetragonal", [][3]float64{{3, 0, 0}, {0, 3, 0}, {0, 0, 4}}, ""},
		{"orthorhombic", [][3]float64{{3, 0, 0}, {0, 4, 0}, {0, 0, 5}}, ""},
		{"triclinic", [][3]float64{{3, 0.1, 0.2}, {0.3, 4, 0}, {0.5, 0.2, 5}}, ""},
		{"square", [][3]float64{{3, 0, 0}, {0, 3, 0}}, Square},
		{"square skewed basis, tilted plane", rot([3]float64{3, 0, 0}, [3]float64{3, 3, 0}), Square},
		{"rectangular", [][3]float64{{3, 0, 0}, {0, 5, 0}}, Rectangular},
		{"hexagonal 2D", [][3]float64{{3, 0, 0}, {-1.5, 1.5 * s3, 0}}, Hexagonal},
		{"centred rectangular", [][3]float64{{3, 0, 0}, {1.5, 4, 0}}, CentredRect},
		{"oblique", [][3]float64{{3, 0, 0}, {1, 4, 0}}, Oblique},
		{"1d", [][3]float64{{0, 0, 2.5}}, Linear},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			var lat [3][3]float64
			copy(lat[:], tc.vecs)
			got, pts := Detect(lat, len(tc.vecs))
			if got != tc.want {
				t.Errorf("Detect = %q; want %q", got, tc.want)
			}
			if _, ok := pts["G"]; !ok {
				t.Errorf("no Γ among %v", pts)
			}
		})
	}
}

// randomRotation is a uniformly random proper rotation from a normalised
// Gaussian quaternion (Shoemake, "Uniform random rotations", Graphics Gems
// III (1992)).
func randomRotation(rng *rand.Rand) [3][3]float64 {
	q := [4]float64{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
	n := math.Sqrt(q[0]*q[0] + q[1]*q[1] + q[2]*q[2] + q[3]*q[3])
	w, x, y, z := q[0]/n, q[1]/n, q[2]/n, q[3]/n
	return [3][3]float64{
		{1 - 2*(y*y+z*z), 2 * (x*y - z*w), 2 * (x*z + y*w)},
		{2 * (x*y + z*w), 1 - 2*(x*x+z*z), 2 * (y*z - x*w)},
		{2 * (x*z - y*w), 2 * (y*z + x*w), 1 - 2*(x*x+y*y)},
	}
}

func rotate3(r [3][3]float64, v [3]float64) [3]float64 {
	var o [3]float64
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			o[a] += r[a][b] * v[b]
		}
	}
	return o
}

// TestReciprocal: b_k·a_l = 2π δ_kl for the d vectors given, in 1, 2 and 3
// dimensions (definition of the reciprocal lattice; Ashcroft & Mermin,
// Solid State Physics, ch. 5), and GramMeasure is |a₁·(a₂×a₃)| in 3D,
// |a₁×a₂| in 2D and |a₁| in 1D (the same chapter's cell volume).
func TestReciprocal(t *testing.T) {
	a := [3][3]float64{{3, 0.2, 0.1}, {0.5, 4, 0.3}, {0.2, 0.1, 5}}
	for d := 1; d <= 3; d++ {
		b := Reciprocal(a, d)
		for k := 0; k < d; k++ {
			for l := 0; l < d; l++ {
				want := 0.0
				if k == l {
					want = 2 * math.Pi
				}
				if got := Dot(b[k], a[l]); math.Abs(got-want) > 1e-12 {
					t.Errorf("d=%d: b%d·a%d = %v; want %v", d, k, l, got, want)
				}
			}
		}
		var want float64
		switch d {
		case 1:
			want = Norm(a[0])
		case 2:
			want = Norm(Cross(a[0], a[1]))
		case 3:
			want = math.Abs(Dot(a[0], Cross(a[1], a[2])))
		}
		if got := GramMeasure(a[:d]); math.Abs(got-want) > 1e-12*want {
			t.Errorf("d=%d: GramMeasure = %v; want %v", d, got, want)
		}
	}
}

// TestPointGroup: the integer rotations preserving the metric are the
// lattice's holohedry — 48 for a cubic lattice (m3̄m), 24 for a hexagonal
// one (6/mmm), 16 for a tetragonal one (4/mmm), 8 for a square net (4mm),
// 12 for a hexagonal net (6mm), 2 for a line (International Tables for
// Crystallography, Vol. A, the lattice point symmetries of the crystal
// families) — each with InvTransposeInt its inverse transpose.
func TestPointGroup(t *testing.T) {
	s3 := math.Sqrt(3)
	cases := []struct {
		name string
		lat  [3][3]float64
		d    int
		want int
	}{
		{"fcc", [3][3]float64{{0, 2, 2}, {2, 0, 2}, {2, 2, 0}}, 3, 48},
		{"hexagonal", [3][3]float64{{1.5, -1.5 * s3, 0}, {1.5, 1.5 * s3, 0}, {0, 0, 5}}, 3, 24},
		{"tetragonal", [3][3]float64{{3, 0, 0}, {0, 3, 0}, {0, 0, 4}}, 3, 16},
		{"square", [3][3]float64{{3, 0, 0}, {0, 3, 0}}, 2, 8},
		{"hexagonal 2D", [3][3]float64{{3, 0, 0}, {-1.5, 1.5 * s3, 0}}, 2, 12},
		{"1d", [3][3]float64{{2.5, 0, 0}}, 1, 2},
	}
	for _, tc := range cases {
		ops := PointGroup(tc.lat, tc.d, 1e-4)
		if len(ops) != tc.want {
			t.Errorf("%s: %d operations; want %d", tc.name, len(ops), tc.want)
		}
		hasIdentity := false
		for _, r := range ops {
			hasIdentity = hasIdentity || r == Identity()
			q := InvTransposeInt(r)
			for i := 0; i < 3; i++ {
				for j := 0; j < 3; j++ {
					var s int // (Rᵀ Q)_ij = δ_ij when Q = R⁻ᵀ
					for k := 0; k < 3; k++ {
						s += r[k][i] * q[k][j]
					}
					if (i == j && s != 1) || (i != j && s != 0) {
						t.Fatalf("%s: InvTransposeInt(%v) = %v is not R⁻ᵀ", tc.name, r, q)
					}
				}
			}
		}
		if !hasIdentity {
			t.Errorf("%s: identity missing", tc.name)
		}
	}
}

// TestPointGroupTolerance: a hexagonal lattice typed to 6 decimals
// (a·√3/2 = 2.598076 for a = 3 Å) keeps the 24 rotations of 6/mmm at a
// tolerance of 1e-4 Å, above its typing error of 5e-7 Å, and loses the
// ones that exchange a1 and a2 at 1e-9 Å, below it (International Tables
// for Crystallography, Vol. A: 6/mmm has order 24).
func TestPointGroupTolerance(t *testing.T) {
	lat := [3][3]float64{{3, 0, 0}, {-1.5, 2.598076, 0}, {0, 0, 5.2}}
	if n := len(PointGroup(lat, 3, 1e-4)); n != 24 {
		t.Errorf("at 1e-4 Å: %d rotations; want 24", n)
	}
	if n := len(PointGroup(lat, 3, 1e-9)); n >= 24 {
		t.Errorf("at 1e-9 Å: %d rotations; want fewer than 24", n)
	}
}
