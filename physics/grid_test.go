package physics

import (
	"context"
	"math"
	"math/cmplx"
	"testing"
)

// TestEigenvectors: D e = λ e and the eigenvectors are orthonormal
// (definition of a Hermitian eigendecomposition; common practice).
func TestEigenvectors(t *testing.T) {
	m := mustCompile(t, loadExample(t, "rocksalt-like"))
	n := m.Modes()
	for _, q := range [][3]float64{{0.1, 0.2, 0.3}, {0.5, 0.5, 0.5}, {0, 0, 0.5}} {
		d := m.DynamicalMatrix(q, nil)
		vals, vecs := hermitianEigen(d, n, true)
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
	m := mustCompile(t, loadExample(t, "chain"))
	g, err := m.GridModes(context.Background(), GridSpec{Mesh: [3]int{5}, Finite: true}, GridOptions{Projections: true})
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
	m := mustCompile(t, loadExample(t, "chain"))
	g, err := m.GridModes(context.Background(), GridSpec{Mesh: [3]int{4}, Shifted: true}, GridOptions{})
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
