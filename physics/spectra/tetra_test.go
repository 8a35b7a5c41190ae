package spectra

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/lattice"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// simplexSample draws n points uniformly in a simplex of d+1 corners as
// barycentric coordinates (a flat Dirichlet: normalised exponentials; common
// practice, e.g. Devroye, Non-Uniform Random Variate Generation, §V.2).
func simplexSample(r *rand.Rand, d, n int) [][4]float64 {
	out := make([][4]float64, n)
	for i := range out {
		sum := 0.0
		for c := 0; c <= d; c++ {
			out[i][c] = r.ExpFloat64()
			sum += out[i][c]
		}
		for c := 0; c <= d; c++ {
			out[i][c] /= sum
		}
	}
	return out
}

// TestSimplexWeightsMonteCarlo checks n(x) and the corner weights w_j(x) of
// segments, triangles and tetrahedra against their definitions, n = V·P(ε <
// x) and w_j = V·E[λ_j θ(x − ε)] for ε linear in the barycentric coordinates
// λ (Blöchl, Jepsen & Andersen, Phys. Rev. B 49, 16223 (1994), eq. (B1)
// ff.), estimated by Monte Carlo. 200 000 samples give a standard error below
// 1e-3 V; the tolerance is 4e-3 V.
func TestSimplexWeightsMonteCarlo(t *testing.T) {
	r := rand.New(rand.NewPCG(4, 16223))
	const samples = 200000
	const v = 1.0
	for _, tc := range []struct {
		name string
		dim  int
		e    [4]float64
	}{
		{"segment", 1, [4]float64{0.3, 1.7}},
		{"triangle", 2, [4]float64{-0.5, 0.2, 1.1}},
		{"triangle-degenerate-top", 2, [4]float64{0, 1, 1}},
		{"tetrahedron", 3, [4]float64{0.1, 0.5, 0.6, 1.4}},
		{"tetrahedron-spread", 3, [4]float64{-1, 0.9, 2.5, 2.6}},
		{"tetrahedron-pair", 3, [4]float64{0, 0, 1, 1}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			pts := simplexSample(r, tc.dim, samples)
			lo, hi := tc.e[0], tc.e[tc.dim]
			for q := 0; q <= 10; q++ {
				x := lo - 0.1 + (hi-lo+0.2)*float64(q)/10
				var mc [4]float64
				mcN := 0.0
				for _, lam := range pts {
					eps := 0.0
					for c := 0; c <= tc.dim; c++ {
						eps += lam[c] * tc.e[c]
					}
					if eps < x {
						mcN++
						for c := 0; c <= tc.dim; c++ {
							mc[c] += lam[c]
						}
					}
				}
				var w [4]float64
				simplexCorners(tc.dim, &tc.e, v, x, &w)
				n := simplexCount(tc.dim, &tc.e, v, x)
				if got, want := n, mcN/samples; math.Abs(got-want) > 4e-3 {
					t.Errorf("x=%.3f: n = %.5f; Monte Carlo %.5f", x, got, want)
				}
				sum := 0.0
				for c := 0; c <= tc.dim; c++ {
					sum += w[c]
					if got, want := w[c], mc[c]/samples; math.Abs(got-want) > 4e-3 {
						t.Errorf("x=%.3f: w[%d] = %.5f; Monte Carlo %.5f", x, c, got, want)
					}
				}
				// Σ_j w_j = n exactly (the barycentric coordinates sum to 1).
				if math.Abs(sum-n) > 1e-14 {
					t.Errorf("x=%.3f: Σw = %.16g, n = %.16g", x, sum, n)
				}
			}
		})
	}
}

// TestSimplexContinuity: n(x) and w_j(x) are continuous across the corner
// frequencies where the formula changes (they are integrals of a bounded
// density; common practice), and the fast accumulation loops agree with
// the reference piecewise formulas.
func TestSimplexContinuity(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 1994))
	for trial := 0; trial < 200; trial++ {
		dim := 1 + trial%3
		var e [4]float64
		for c := 0; c <= dim; c++ {
			e[c] = r.Float64()
		}
		slices.Sort(e[:dim+1])
		gap := math.Inf(1)
		for c := 0; c < dim; c++ {
			gap = math.Min(gap, e[c+1]-e[c])
		}
		const h = 1e-12
		tol := math.Max(1e-10, 10*h/gap) // the density is at most ~1/gap
		for c := 0; c <= dim; c++ {
			var wl, wr [4]float64
			simplexCorners(dim, &e, 1, e[c]-h, &wl)
			simplexCorners(dim, &e, 1, e[c]+h, &wr)
			nl, nr := simplexCount(dim, &e, 1, e[c]-h), simplexCount(dim, &e, 1, e[c]+h)
			if math.Abs(nl-nr) > tol {
				t.Fatalf("dim %d e=%v: n jumps at e[%d]: %g → %g", dim, e, c, nl, nr)
			}
			for k := 0; k <= dim; k++ {
				if math.Abs(wl[k]-wr[k]) > tol {
					t.Fatalf("dim %d e=%v: w[%d] jumps at e[%d]: %g → %g", dim, e, k, c, wl[k], wr[k])
				}
			}
		}
		// Fast loop (addSimplex) against simplexCount on a fine abscissa set.
		g := newCumGrid(-0.05, 0.01, 111)
		a := newCumAcc(g, 0, false, 0)
		a.addSimplex(dim, &e, 0.25)
		tot, _ := a.totals()
		for j, got := range tot {
			if want := simplexCount(dim, &e, 0.25, g.at(j)); math.Abs(got-want) > 1e-14 {
				t.Fatalf("dim %d e=%v x=%g: accumulated %.16g, formula %.16g", dim, e, g.at(j), got, want)
			}
		}
	}
}

// TestSimplexDegenerate: coincident corner frequencies (flat bands) give a
// clean step of the full weight at that frequency and never NaN (common
// practice: a flat band is a delta function in the DOS).
func TestSimplexDegenerate(t *testing.T) {
	for dim := 1; dim <= 3; dim++ {
		e := [4]float64{2, 2, 2, 2}
		for _, x := range []float64{1.999, 2, 2.001} {
			var w [4]float64
			simplexCorners(dim, &e, 1, x, &w)
			n := simplexCount(dim, &e, 1, x)
			want := 0.0 // n(x) counts states strictly below x
			if x > 2 {
				want = 1
			}
			if math.IsNaN(n) || n != want {
				t.Errorf("dim %d x=%g: n = %v; want %v", dim, x, n, want)
			}
			for c := 0; c <= dim; c++ {
				if math.IsNaN(w[c]) {
					t.Errorf("dim %d x=%g: w[%d] is NaN", dim, x, c)
				}
			}
		}
	}
}

// TestShortestDiagonal: the chosen cut is the shortest of the cell's main
// diagonals (Blöchl, Jepsen & Andersen 1994, §II), checked by brute force on
// sheared lattices; for the fcc example the four diagonals of the
// reciprocal (bcc) cell are not all equal, and the shortest is chosen.
func TestShortestDiagonal(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 3))
	for trial := 0; trial < 50; trial++ {
		var b [3][3]float64
		for i := range b {
			for j := range b[i] {
				b[i][j] = r.Float64() - 0.5
			}
			b[i][i] += 1
		}
		msh := [3]int{1 + r.IntN(8), 1 + r.IntN(8), 1 + r.IntN(8)}
		s := mesh.ShortestDiagonal(b, msh, 3)
		length := func(s int) float64 {
			var v [3]float64
			for k := 0; k < 3; k++ {
				sign := 1.0
				if s>>k&1 == 1 {
					sign = -1
				}
				for a := 0; a < 3; a++ {
					v[a] += sign * b[k][a] / float64(msh[k])
				}
			}
			return lattice.Norm(v)
		}
		for o := 0; o < 4; o++ {
			if length(o) < length(s)*(1-1e-9) {
				t.Fatalf("chose diagonal %d (%.6g) but %d is shorter (%.6g)", s, length(s), o, length(o))
			}
		}
	}
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	set := mesh.GridSimplices(m.Reciprocal(), [3]int{8, 8, 8}, 3)
	if len(set.Corners) != 6 || math.Abs(set.Weight*6*512-1) > 1e-15 {
		t.Fatalf("fcc: %d tetrahedra of weight %g; want 6 of 1/(6·512)", len(set.Corners), set.Weight)
	}
	for _, c := range set.Corners {
		if c[0]^c[3] != 7 {
			t.Errorf("tetrahedron %v does not span the main diagonal", c)
		}
	}
}

// TestTetraSitesFast: the prepared-reciprocal tetrahedron loop gives the
// same per-site and total counts as the reference corner weights
// (tetraCorners, checked by Monte Carlo above), to 1e-15.
func TestTetraSitesFast(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 12))
	g := newCumGrid(-0.05, 0.013, 100)
	for trial := 0; trial < 300; trial++ {
		var e [4]float64
		for c := range e {
			e[c] = r.Float64()
		}
		if trial%5 == 0 {
			e[1] = e[0] // degenerate corners
		}
		slices.Sort(e[:])
		fast := newCumAcc(g, 2, true, 0.3)
		ref := newCumAcc(g, 2, true, 0.3)
		for c := 0; c < 4; c++ {
			x := r.Float64()
			for _, a := range []*cumAcc{fast, ref} {
				a.sw[c] = []float64{x, 1 - x}
			}
		}
		fast.addTetraSites(&e, 0.2)
		ref.addSimplexSites(3, &e, 0.2)
		ft, fs := fast.totals()
		rt, rs := ref.totals()
		for j := range ft {
			if math.Abs(ft[j]-rt[j]) > 1e-15 || math.Abs(fs[2*j]-rs[2*j]) > 1e-15 || math.Abs(fs[2*j+1]-rs[2*j+1]) > 1e-15 {
				t.Fatalf("e=%v x=%g: fast (%g, %g, %g), reference (%g, %g, %g)", e, g.at(j), ft[j], fs[2*j], fs[2*j+1], rt[j], rs[2*j], rs[2*j+1])
			}
		}
	}
}
