// Benchmarks of the dipole–dipole term against the short-range assembly
// and the diagonalisation, per q-point, over a ladder of cell sizes.

package polar_test

import (
	"context"
	"fmt"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/polar"
)

// supercellOf is rockSalt(z, ε) described in its N×N×N supercell of the
// fcc primitive cell (2N³ sites), springs as neighbour shells.
func supercellOf(n int, z float64, eps []float64) *physics.Crystal {
	c := rockSalt(z, eps)
	out := &physics.Crystal{Shells: c.Shells, EpsilonInf: eps}
	for k := 0; k < 3; k++ {
		v := c.Lattice[k]
		out.Lattice = append(out.Lattice, [3]float64{float64(n) * v[0], float64(n) * v[1], float64(n) * v[2]})
	}
	for x := 0; x < n*n*n; x++ {
		cell := [3]float64{float64(x / (n * n)), float64(x / n % n), float64(x % n)}
		for _, s := range c.Sites {
			s.Frac = []float64{(s.Frac[0] + cell[0]) / float64(n), (s.Frac[1] + cell[1]) / float64(n), (s.Frac[2] + cell[2]) / float64(n)}
			out.Sites = append(out.Sites, s)
		}
	}
	return out
}

// withoutCharges is c with its polar data removed (the same springs).
func withoutCharges(c *physics.Crystal) *physics.Crystal {
	out := *c
	out.EpsilonInf = nil
	out.Sites = append([]physics.Site(nil), c.Sites...)
	for i := range out.Sites {
		out.Sites[i].BornCharge = nil
	}
	return &out
}

var sink []complex128
var sinkF []float64

// BenchmarkPerQ times, per q-point and for 2, 16 and 54 sites: the
// short-range D(q) alone (a model without charges), the dipole–dipole
// term alone (AddTo), D(q) of the polar model (both), and the frequencies
// of the polar model (assembly and diagonalisation).
func BenchmarkPerQ(b *testing.B) {
	q := [3]float64{0.13, 0.27, -0.31}
	for _, n := range []int{1, 2, 3} {
		c := supercellOf(n, 1.2, iso(3))
		m, err := physics.Compile(context.Background(), c, physics.Options{LongRange: polar.Builder()})
		if err != nil {
			b.Fatal(err)
		}
		plain, err := physics.Compile(context.Background(), withoutCharges(c), physics.Options{})
		if err != nil {
			b.Fatal(err)
		}
		tm := m.LongRangeTerm().(*polar.Term)
		sites := m.Sites()
		a := make([]complex128, m.ModeCount()*m.ModeCount())
		b.Run(fmt.Sprintf("sites=%d/short-range", sites), func(b *testing.B) {
			for b.Loop() {
				sink = plain.DynamicalMatrix(q, a)
			}
		})
		b.Run(fmt.Sprintf("sites=%d/dipole-dipole", sites), func(b *testing.B) {
			b.ReportMetric(float64(tm.RealTerms()), "real-terms")
			b.ReportMetric(float64(tm.ReciprocalVectors()), "G-vectors")
			for b.Loop() {
				tm.AddTo(q, [3]float64{}, a, nil)
			}
		})
		b.Run(fmt.Sprintf("sites=%d/D(q)-polar", sites), func(b *testing.B) {
			for b.Loop() {
				sink = m.DynamicalMatrix(q, a)
			}
		})
		b.Run(fmt.Sprintf("sites=%d/frequencies-polar", sites), func(b *testing.B) {
			for b.Loop() {
				sinkF = m.FrequenciesTHz(q)
			}
		})
		b.Run(fmt.Sprintf("sites=%d/frequencies-short-range", sites), func(b *testing.B) {
			for b.Loop() {
				sinkF = plain.FrequenciesTHz(q)
			}
		})
	}
}
