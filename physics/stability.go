// Dynamical stability of a model on a grid.

package physics

import (
	"context"
	"math"
	"strconv"

	"github.com/materials-lab/modegrid/physics/mesh"
)

// Stability diagonalises D(q) on the Γ-centred side^d grid and returns the
// lowest and highest frequency found (THz; negative for imaginary modes)
// and whether the model is stable: no negative frequency anywhere except
// the p acoustic modes at Γ itself. Rounding noise is exactly 0 already
// (doc.go, Zero and imaginary modes), so any negative frequency is a real
// instability; the acoustic modes at Γ are exempt because for explicit
// blocks that break the acoustic sum rule they are not zero at all, and
// SumRuleViolation reports that separately. A grid samples the
// zone: an instability between its points can be missed, so side should
// resolve the dispersion (8 is a fair start for short-range models).
func (m *Model) Stability(ctx context.Context, side int) (minTHz, maxTHz float64, stable bool, err error) {
	if side < 1 {
		return 0, 0, false, &ValidationError{Violations: []Violation{{Field: "mesh", Description: "must be ≥ 1, got " + strconv.Itoa(side)}}}
	}
	var spec mesh.GridSpec
	for k := 0; k < m.dim; k++ {
		spec.Mesh[k] = side
	}
	g, err := m.GridModes(ctx, spec, GridOptions{})
	if err != nil {
		return 0, 0, false, err
	}
	minTHz, maxTHz, stable = math.Inf(1), math.Inf(-1), true
	n := g.NModes
	for i, p := range g.Points {
		f := g.FreqTHz[i*n : (i+1)*n]
		minTHz = math.Min(minTHz, f[0])
		maxTHz = math.Max(maxTHz, f[n-1])
		first := 0
		if p.Q == ([3]float64{}) {
			first = m.p // the acoustic modes at Γ: their p smallest |ν|
			f = acousticFirst(f, m.p)
		}
		for _, x := range f[first:] {
			if x < 0 {
				stable = false
			}
		}
	}
	return minTHz, maxTHz, stable, nil
}

// acousticFirst returns a copy of f with its p frequencies of smallest
// magnitude moved to the front.
func acousticFirst(f []float64, p int) []float64 {
	c := append([]float64(nil), f...)
	for k := 0; k < p && k < len(c); k++ {
		best := k
		for j := k + 1; j < len(c); j++ {
			if math.Abs(c[j]) < math.Abs(c[best]) {
				best = j
			}
		}
		c[k], c[best] = c[best], c[k]
	}
	return c
}
