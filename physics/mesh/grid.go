// Regular q-point grids and finite-crystal sets.

package mesh

import (
	"context"
	"fmt"
	"math"
)

// QPoint is a wavevector (fractional reciprocal coordinates) with its weight
// in its set.
type QPoint struct {
	Q      [3]float64
	Weight float64
}

// GridSpec is a regular q-point grid: a Monkhorst–Pack grid (Monkhorst &
// Pack, Phys. Rev. B 13, 5188 (1976)), Γ-centred or shifted by half a step,
// or the allowed wavevectors of a finite crystal of Mesh cells under
// periodic boundary conditions. Components of Mesh past the dimensionality
// must be 1 (0 is read as 1).
type GridSpec struct {
	Mesh    [3]int
	Shifted bool // half-step shift (Monkhorst–Pack only), along the d lattice directions
	Finite  bool // finite crystal of Mesh cells: q = n/N, n in (−N/2, N/2]

	dim int // dimensionality, set by Check (0: treat as 3)
}

// Offset is the grid shift s along k: q_k = (n_k + s)/N_k. It is ½ for a
// shifted grid along the crystal's d directions and 0 elsewhere, so
// unused components stay 0.
func (g GridSpec) Offset(k int) float64 {
	d := g.dim
	if d == 0 {
		d = 3
	}
	if g.Shifted && k < d {
		return 0.5
	}
	return 0
}

// MaxGridPoints bounds any grid the engine will build.
const MaxGridPoints = 1 << 27

// normalize resolves zero components to 1 and checks the spec against the
// model's dimensionality, returning violations with field paths under
// prefix.
func (g GridSpec) Check(dim int, prefix string) (GridSpec, []Problem) {
	var vs problems
	g.dim = dim
	for k := 0; k < 3; k++ {
		if g.Mesh[k] == 0 && k >= dim {
			g.Mesh[k] = 1
		}
		if k < dim && g.Mesh[k] < 1 {
			vs.add(fmt.Sprintf("%s[%d]", prefix, k), "must be ≥ 1, got %d", g.Mesh[k])
		}
		if k >= dim && g.Mesh[k] != 1 {
			vs.add(fmt.Sprintf("%s[%d]", prefix, k), "must be 1 for a %d-dimensional crystal, got %d", dim, g.Mesh[k])
		}
	}
	if g.Finite && g.Shifted {
		vs.add(prefix, "a finite crystal has no shifted grid")
	}
	if len(vs.list) == 0 {
		// Multiply step by step so that huge meshes cannot overflow.
		n := 1
		for _, x := range g.Mesh {
			if n > MaxGridPoints/x {
				vs.add(prefix, "%d×%d×%d points is more than the engine limit of %d", g.Mesh[0], g.Mesh[1], g.Mesh[2], MaxGridPoints)
				break
			}
			n *= x
		}
	}
	return g, vs.list
}

// Count is the number of points of the grid.
func (g GridSpec) Count() int {
	n := 1
	for _, x := range g.Mesh {
		if x > 0 {
			n *= x
		}
	}
	return n
}

// Points lists the grid's points in grid order: index (n0·N1 + n1)·N2 + n2,
// nk = 0…Nk−1, q_k = (nk + s)/Nk with s = ½ when shifted, wrapped into
// (−½, ½]. Every point has weight 1/N. For a finite crystal these are
// exactly its allowed wavevectors, each once (common practice).
func (g GridSpec) Points() []QPoint {
	pts, _ := g.PointsContext(context.Background())
	return pts
}

// points is Points polling ctx per row of the grid (a list of 4 million
// points takes 0.2–0.3 s); it returns ctx.Err() if ctx ends first.
func (g GridSpec) PointsContext(ctx context.Context) ([]QPoint, error) {
	n := g.Count()
	pts := make([]QPoint, 0, n)
	s0, s1, s2 := g.Offset(0), g.Offset(1), g.Offset(2)
	w := 1 / float64(n)
	for a := 0; a < g.Mesh[0]; a++ {
		for b := 0; b < g.Mesh[1]; b++ {
			if err := ctx.Err(); err != nil {
				return nil, err
			}
			for c := 0; c < g.Mesh[2]; c++ {
				pts = append(pts, QPoint{Q: [3]float64{
					wrapHalf((float64(a) + s0) / float64(g.Mesh[0])),
					wrapHalf((float64(b) + s1) / float64(g.Mesh[1])),
					wrapHalf((float64(c) + s2) / float64(g.Mesh[2])),
				}, Weight: w})
			}
		}
	}
	return pts, nil
}

// Point returns point i of Points without building the list, for grids
// too large to hold (a 1 cm crystal of 1 nm cells has 10⁷ points).
// Components of Mesh that are 0 count as 1.
func (g GridSpec) Point(i int) QPoint {
	var n [3]int
	for k := range n {
		n[k] = max(1, g.Mesh[k])
	}
	c := i % n[2]
	b := (i / n[2]) % n[1]
	a := i / (n[1] * n[2])
	return QPoint{Q: [3]float64{
		wrapHalf((float64(a) + g.Offset(0)) / float64(n[0])),
		wrapHalf((float64(b) + g.Offset(1)) / float64(n[1])),
		wrapHalf((float64(c) + g.Offset(2)) / float64(n[2])),
	}, Weight: 1 / float64(g.Count())}
}

// wrapHalf maps x into (−½, ½].
func wrapHalf(x float64) float64 {
	x -= math.Ceil(x - 0.5)
	if x == -0.5 {
		x = 0.5
	}
	return x
}

// Problem is one thing wrong with a grid spec: the field path and what is
// wrong with it.
type Problem struct {
	Field, Description string
}

type problems struct{ list []Problem }

func (ps *problems) add(field, format string, args ...any) {
	ps.list = append(ps.list, Problem{Field: field, Description: fmt.Sprintf(format, args...)})
}
