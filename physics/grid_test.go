// Tests of q-point grids, finite crystals and GridModes.

package physics_test

import (
	"context"
	"errors"
	"math"
	"math/cmplx"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"

	"github.com/materials-lab/modegrid/physics/eigen"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// TestEigenvectors: D e = λ e and the eigenvectors are orthonormal
// (definition of a Hermitian eigendecomposition; common practice).
func TestEigenvectors(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "rocksalt-like"))
	n := m.ModeCount()
	for _, q := range [][3]float64{{0.1, 0.2, 0.3}, {0.5, 0.5, 0.5}, {0, 0, 0.5}} {
		d := m.DynamicalMatrix(q, nil)
		vals, vecs := eigen.Hermitian(d, n, true)
		for k := 0; k < n; k++ {
			for r := 0; r < n; r++ {
				var s complex128
				for c := 0; c < n; c++ {
					s += d[r*n+c] * vecs[k*n+c]
				}
				if cmplx.Abs(s-complex(vals[k], 0)*vecs[k*n+r]) > 1e-10 {
					t.Fatalf("q=%v mode %d: residual %g", q, k, cmplx.Abs(s-complex(vals[k], 0)*vecs[k*n+r]))
				}
			}
			for l := 0; l < n; l++ {
				var dot complex128
				for c := 0; c < n; c++ {
					dot += cmplx.Conj(vecs[k*n+c]) * vecs[l*n+c]
				}
				want := 0.0
				if k == l {
					want = 1
				}
				if cmplx.Abs(dot-complex(want, 0)) > 1e-10 {
					t.Fatalf("q=%v: <e%d|e%d> = %v", q, k, l, dot)
				}
			}
		}
	}
}

// TestFiniteCrystalPoints: a ring of 5 cells allows exactly n = −2…2
// (common practice: N allowed wavevectors under periodic boundary
// conditions).
func TestFiniteCrystalPoints(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "chain"))
	g, err := m.GridModes(context.Background(), mesh.GridSpec{Mesh: [3]int{5}, Finite: true}, physics.GridOptions{Projections: true})
	if err != nil {
		t.Fatal(err)
	}
	if len(g.Points) != 5 {
		t.Fatalf("got %d points; want 5", len(g.Points))
	}
	seen := map[int]bool{}
	for _, p := range g.Points {
		n := int(math.Round(p.Q[0] * 5))
		if n < -2 || n > 2 || seen[n] {
			t.Errorf("unexpected q = %v", p.Q)
		}
		seen[n] = true
	}
	for i, w := range g.SiteWeight {
		if math.Abs(w-1) > 1e-12 {
			t.Errorf("site weight %d = %v; want 1 for one site", i, w)
		}
	}
}

// TestShiftedGridKeepsUnusedComponentsZero: a shifted grid shifts only
// along the crystal's d directions (Monkhorst & Pack, PRB 13, 5188: the
// grid lives in the d-dimensional zone).
func TestShiftedGridKeepsUnusedComponentsZero(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "chain"))
	g, err := m.GridModes(context.Background(), mesh.GridSpec{Mesh: [3]int{4}, Shifted: true}, physics.GridOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range g.Points {
		if p.Q[1] != 0 || p.Q[2] != 0 {
			t.Errorf("q = %v: unused components must be 0", p.Q)
		}
		if math.Abs(math.Abs(p.Q[0]*8)-math.Round(math.Abs(p.Q[0]*8))) > 1e-12 || int(math.Round(math.Abs(p.Q[0]*8)))%2 != 1 {
			t.Errorf("q1 = %v: want an odd multiple of 1/8", p.Q[0])
		}
	}
}

// TestFiniteCrystalCounts: a crystal of N1×N2×N3 cells under periodic
// boundary conditions has exactly N1·N2·N3 allowed wavevectors q_k = n/N_k,
// n in (−N/2, N/2], each once, hence cells × sites × p modes (common
// practice).
func TestFiniteCrystalCounts(t *testing.T) {
	cases := []struct {
		name    string
		example string
		mesh    [3]int
	}{
		{"ring of 1", "chain", [3]int{1}},
		{"ring of 5", "chain", [3]int{5}},
		{"ring of 6", "diatomic-chain", [3]int{6}},
		{"3×4 sheet", "square-net", [3]int{3, 4}},
		{"2×3×5 crystal", "rocksalt-like", [3]int{2, 3, 5}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m := testmodels.Compile(t, testmodels.Load(t, tc.example))
			g, err := m.GridModes(testCtx(t), mesh.GridSpec{Mesh: tc.mesh, Finite: true}, physics.GridOptions{})
			if err != nil {
				t.Fatal(err)
			}
			cells := 1
			for k := 0; k < m.Dim(); k++ {
				cells *= tc.mesh[k]
			}
			if len(g.Points) != cells || len(g.FreqTHz) != cells*m.Sites()*m.Polarizations() {
				t.Fatalf("%d points, %d modes; want %d, %d", len(g.Points), len(g.FreqTHz), cells, cells*m.Sites()*m.Polarizations())
			}
			seen := map[[3]int]bool{}
			var wsum float64
			for _, p := range g.Points {
				var key [3]int
				for k := 0; k < 3; k++ {
					n := max(1, tc.mesh[k])
					x := p.Q[k] * float64(n)
					key[k] = int(math.Round(x))
					if math.Abs(x-float64(key[k])) > 1e-9 || 2*key[k] <= -n || 2*key[k] > n {
						t.Errorf("q = %v: component %d is not n/N with n in (−N/2, N/2]", p.Q, k)
					}
				}
				if seen[key] {
					t.Errorf("q = %v twice", p.Q)
				}
				seen[key] = true
				wsum += p.Weight
			}
			if math.Abs(wsum-1) > 1e-12 {
				t.Errorf("weights sum to %v", wsum)
			}
		})
	}
}

// TestFiniteCrystalSpacing: allowed wavevectors of a ring of N cells of
// length a are spaced 2π/L, L = N a; a 1 cm chain of 1 nm cells has
// N = 10⁷ cells, so about 10⁷ modes per branch, spaced 2π/(1 cm) (common
// practice). The grid is never built: Count and Point suffice.
func TestFiniteCrystalSpacing(t *testing.T) {
	for _, tc := range []struct {
		name string
		n    int
		aA   float64
	}{{"ring of 7, 2.5 Å", 7, 2.5}, {"1 cm of 1 nm cells", 10_000_000, 10}} {
		t.Run(tc.name, func(t *testing.T) {
			c := &physics.Crystal{Lattice: [][3]float64{{tc.aA, 0, 0}}, Polarizations: 1,
				Sites:   []physics.Site{{Label: "A", MassAmu: 50, Frac: []float64{0}}},
				Springs: []physics.Spring{{From: 0, To: 0, Cell: []int{1}, KLong: 1}}}
			m := testmodels.Compile(t, c)
			spec, err := physics.NormalizeGrid(mesh.GridSpec{Mesh: [3]int{tc.n}, Finite: true}, m.Dim())
			if err != nil {
				t.Fatal(err)
			}
			if modes := spec.Count() * m.Sites() * m.Polarizations(); modes != tc.n {
				t.Fatalf("%d modes; want %d", modes, tc.n)
			}
			L := float64(tc.n) * tc.aA
			for _, i := range []int{1, 2, tc.n / 3, tc.n/2 - 1} {
				q0, q1 := m.CartQ(spec.Point(i-1).Q), m.CartQ(spec.Point(i).Q)
				if d := q1[0] - q0[0]; math.Abs(d-2*math.Pi/L) > 1e-9*2*math.Pi/L {
					t.Errorf("spacing at %d: %.6g Å⁻¹; want 2π/L = %.6g", i, d, 2*math.Pi/L)
				}
			}
			if tc.n == 10_000_000 && !relClose(2*math.Pi/L, 2*math.Pi/1e8, 1e-12) {
				t.Errorf("1 cm = 1e8 Å")
			}
		})
	}
}

// TestMonkhorstPackGrids: Γ-centred grids contain Γ; shifted grids do not
// and are symmetric under q → −q (Monkhorst & Pack, PRB 13, 5188 (1976));
// weights sum to 1; components past d stay 0.
func TestMonkhorstPackGrids(t *testing.T) {
	for _, tc := range []struct {
		name    string
		example string
		mesh    [3]int
		shifted bool
	}{
		{"1D 8", "chain", [3]int{8}, false},
		{"1D 8 shifted", "chain", [3]int{8}, true},
		{"2D 4×6 shifted", "square-net", [3]int{4, 6}, true},
		{"3D 4×4×4", "fcc", [3]int{4, 4, 4}, false},
		{"3D 3×4×5 shifted", "fcc", [3]int{3, 4, 5}, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m := testmodels.Compile(t, testmodels.Load(t, tc.example))
			spec, err := physics.NormalizeGrid(mesh.GridSpec{Mesh: tc.mesh, Shifted: tc.shifted}, m.Dim())
			if err != nil {
				t.Fatal(err)
			}
			pts := spec.Points()
			set := map[[3]int64]bool{}
			key := func(q [3]float64) [3]int64 {
				var k [3]int64
				for x := range q {
					w := q[x] - math.Floor(q[x])
					k[x] = int64(math.Round(w*1e9)) % 1_000_000_000
				}
				return k
			}
			hasGamma := false
			var wsum float64
			for i, p := range pts {
				set[key(p.Q)] = true
				hasGamma = hasGamma || p.Q == [3]float64{}
				wsum += p.Weight
				if spec.Point(i) != p {
					t.Fatalf("Point(%d) = %v; Points()[%d] = %v", i, spec.Point(i), i, p)
				}
				for k := m.Dim(); k < 3; k++ {
					if p.Q[k] != 0 {
						t.Fatalf("q = %v: component %d must be 0", p.Q, k)
					}
				}
			}
			if hasGamma == tc.shifted {
				t.Errorf("Γ in grid: %v; shifted: %v", hasGamma, tc.shifted)
			}
			if tc.shifted {
				for _, p := range pts {
					if !set[key([3]float64{-p.Q[0], -p.Q[1], -p.Q[2]})] {
						t.Errorf("−q of %v missing", p.Q)
					}
				}
			}
			if math.Abs(wsum-1) > 1e-12 || len(set) != len(pts) {
				t.Errorf("weights %v, %d distinct of %d", wsum, len(set), len(pts))
			}
		})
	}
}

// TestGridModesMatchesPoints: GridModes without symmetry gives the
// frequencies and eigenvectors of single points, and site weights whose sum
// over each degenerate group equals that of the eigenvectors (the group
// sum is basis-independent; definitions, common practice).
func TestGridModesMatchesPoints(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "rocksalt-like"))
	g, err := m.GridModes(testCtx(t), mesh.GridSpec{Mesh: [3]int{3, 2, 4}}, physics.GridOptions{Projections: true, Eigenvectors: true, NoSymmetry: true})
	if err != nil {
		t.Fatal(err)
	}
	n := m.ModeCount()
	for i, p := range g.Points {
		f, v := m.ModesAt(p.Q)
		if !testmodels.CloseSlices(g.FreqTHz[i*n:(i+1)*n], f, 1e-14) {
			t.Fatalf("point %d: %v; want %v", i, g.FreqTHz[i*n:(i+1)*n], f)
		}
		w := make([]float64, n*2)
		for k := 0; k < n; k++ {
			for c := 0; c < n; c++ {
				z := v[k*n+c]
				w[k*2+c/3] += real(z)*real(z) + imag(z)*imag(z)
				if g.Eigvecs[(i*n+k)*n+c] != z {
					t.Fatalf("point %d: eigenvectors differ", i)
				}
			}
		}
		for _, gr := range degenerateGroups(f) {
			for s := 0; s < 2; s++ {
				var got, want float64
				for k := gr[0]; k < gr[1]; k++ {
					got += g.SiteWeight[(i*n+k)*2+s]
					want += w[k*2+s]
				}
				if math.Abs(got-want) > 1e-13 {
					t.Fatalf("point %d modes %v site %d: weight %v; want %v", i, gr, s, got, want)
				}
			}
		}
	}
}

// degenerateGroups splits ascending frequencies into [start, end) groups
// equal within 1e-6 THz.
func degenerateGroups(f []float64) [][2]int {
	var out [][2]int
	for k := 0; k < len(f); {
		e := k + 1
		for e < len(f) && f[e]-f[e-1] < 1e-6 {
			e++
		}
		out = append(out, [2]int{k, e})
		k = e
	}
	return out
}

// TestGridSiteTensors: SiteTensor holds Re(e_sα e*_sβ) of the
// eigenvectors summed over each degenerate group (the basis-independent
// part), and its trace is the site weight (definitions).
func TestGridSiteTensors(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "rocksalt-like"))
	g, err := m.GridModes(testCtx(t), mesh.GridSpec{Mesh: [3]int{2, 3, 2}}, physics.GridOptions{SiteTensors: true, Eigenvectors: true, Projections: true, NoSymmetry: true})
	if err != nil {
		t.Fatal(err)
	}
	n, ns := g.NModes, g.NSites
	for i := range g.Points {
		for _, gr := range degenerateGroups(g.FreqTHz[i*n : (i+1)*n]) {
			for s := 0; s < ns; s++ {
				var got, want [6]float64
				var trace, weight float64
				for k := gr[0]; k < gr[1]; k++ {
					tt := g.SiteTensor[((i*n+k)*ns+s)*6 : ((i*n+k)*ns+s+1)*6]
					e := g.Eigvecs[(i*n+k)*n+3*s : (i*n+k)*n+3*s+3]
					x := 0
					for a := 0; a < 3; a++ {
						for b := a; b < 3; b++ {
							got[x] += tt[x]
							want[x] += real(e[a] * cmplx.Conj(e[b]))
							x++
						}
					}
					trace += tt[0] + tt[3] + tt[5]
					weight += g.SiteWeight[(i*n+k)*ns+s]
				}
				for x := range got {
					if math.Abs(got[x]-want[x]) > 1e-14 {
						t.Fatalf("point %d modes %v site %d pair %d: %v; want %v", i, gr, s, x, got[x], want[x])
					}
				}
				if math.Abs(trace-weight) > 1e-14 {
					t.Fatalf("trace %v; site weight %v", trace, weight)
				}
			}
		}
	}
}

// TestGridModesCancel: a cancelled context stops GridModes with its error.
func TestGridModesCancel(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "rocksalt-like"))
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := m.GridModes(ctx, mesh.GridSpec{Mesh: [3]int{64, 64, 64}}, physics.GridOptions{}); !errors.Is(err, context.Canceled) {
		t.Fatalf("err = %v; want context.Canceled", err)
	}
}

// TestGridSpecLimits: meshes must be ≥ 1 along d, 1 past d, and at most
// MaxGridPoints in all, without integer overflow on absurd sizes.
func TestGridSpecLimits(t *testing.T) {
	for _, tc := range []struct {
		name  string
		dim   int
		mesh  [3]int
		field string
	}{
		{"zero along d", 3, [3]int{4, 0, 4}, "mesh[1]"},
		{"negative", 1, [3]int{-2}, "mesh[0]"},
		{"past d", 2, [3]int{4, 4, 2}, "mesh[2]"},
		{"too many points", 3, [3]int{1024, 1024, 1024}, "mesh"},
		{"overflowing product", 3, [3]int{1 << 31, 1 << 31, 4}, "mesh"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := physics.NormalizeGrid(mesh.GridSpec{Mesh: tc.mesh}, tc.dim)
			vs := violationsOf(t, err)
			if len(vs) == 0 || vs[0].Field != tc.field {
				t.Fatalf("violations %v; want one on %s", vs, tc.field)
			}
		})
	}
	if _, err := physics.NormalizeGrid(mesh.GridSpec{Mesh: [3]int{4, 4}, Finite: true, Shifted: true}, 2); err == nil {
		t.Error("a shifted finite crystal must be refused")
	}
}
