// Heat capacities: the harmonic mode sum over a grid and its derivatives
// through the modes' frequencies.

package fit

import (
	"context"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/eigen"
	"github.com/materials-lab/modegrid/physics/internal/parallel"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// heatGroup is the heat-capacity data summed over one grid: every set on
// that grid, every temperature of each.
type heatGroup struct {
	spec  mesh.GridSpec // checked
	rows  []int         // the rows, in order
	temps []float64     // K, per row
	conv  []float64     // per row: the row's basis per eV/K per cell
	pairs []gridPair    // the points summed: one of each pair q, −q
}

// gridPair is a grid point and the weight it carries: 2/N when it stands
// for its time-reversal partner −q too (equal modes, D(−q) = D(q)*), 1/N
// when it is its own partner.
type gridPair struct {
	i int
	w float64
}

// setupHeat adds the rows of the heat capacities, grouped by grid.
func (ev *evaluator) setupHeat(p *Problem, m *physics.Model) {
	var cellMass float64
	for i := 0; i < m.Sites(); i++ {
		cellMass += m.MassAmu(i)
	}
	index := map[mesh.GridSpec]int{}
	for i, s := range p.HeatCapacities {
		spec, _ := s.Grid.Check(m.Dim(), "")
		g, ok := index[spec]
		if !ok {
			g = len(ev.heat)
			index[spec] = g
			ev.heat = append(ev.heat, heatGroup{spec: spec, pairs: timeReversalPairs(spec)})
		}
		conv := basisPerEVPerK(s.Basis, m.Sites(), cellMass)
		for j, pt := range s.Points {
			r := ev.addRow(fmt.Sprintf("heat_capacities[%d].points[%d]", i, j), pt.Value, pt.Sigma)
			hg := &ev.heat[g]
			hg.rows, hg.temps, hg.conv = append(hg.rows, r), append(hg.temps, pt.TempK), append(hg.conv, conv)
		}
	}
}

// basisPerEVPerK converts a heat capacity per cell in eV/K to basis b.
func basisPerEVPerK(b HeatBasis, sites int, cellMassAmu float64) float64 {
	switch b {
	case PerMolCells:
		return physics.EVPerKToJPerMolK(1)
	case PerKg:
		return physics.EVPerKToJPerKgK(1, cellMassAmu)
	}
	return physics.EVPerKToJPerMolK(1) / float64(sites)
}

// timeReversalPairs lists one point of each pair {q, −q} of the grid
// (indices of mesh.GridSpec.Point) with its weight.
func timeReversalPairs(spec mesh.GridSpec) []gridPair {
	n := spec.Count()
	var out []gridPair
	for i := 0; i < n; i++ {
		j := partner(spec, i)
		switch {
		case j == i:
			out = append(out, gridPair{i, 1 / float64(n)})
		case i < j:
			out = append(out, gridPair{i, 2 / float64(n)})
		}
	}
	return out
}

// partner is the index of −q for point i of the grid: n_k → −n_k mod N_k
// on an unshifted axis, n_k → N_k − 1 − n_k on a shifted one (q_k = (n_k
// + ½)/N_k).
func partner(spec mesh.GridSpec, i int) int {
	var n [3]int
	for k := range n {
		n[k] = max(1, spec.Mesh[k])
	}
	idx := [3]int{i / (n[1] * n[2]), (i / n[2]) % n[1], i % n[2]}
	for k := range idx {
		if spec.Offset(k) != 0 {
			idx[k] = n[k] - 1 - idx[k]
		} else {
			idx[k] = (n[k] - idx[k]) % n[k]
		}
	}
	return (idx[0]*n[1]+idx[1])*n[2] + idx[2]
}

// evalHeat fills the heat-capacity rows of e.
func (ev *evaluator) evalHeat(ctx context.Context, e *evaluation) error {
	for g := range ev.heat {
		if err := ev.evalHeatGroup(ctx, &ev.heat[g], e); err != nil {
			return err
		}
	}
	return nil
}

// heatSlices is the fixed number of slices of a grid sum: the sums merge
// in slice order, so they do not depend on scheduling or core count.
const heatSlices = 16

// evalHeatGroup sums the grid of one group on all cores.
func (ev *evaluator) evalHeatGroup(ctx context.Context, g *heatGroup, e *evaluation) error {
	np, nt := len(ev.params), len(g.temps)
	acc := make([][]float64, heatSlices) // per slice: nt values, then nt × np derivatives
	err := parallel.Slices(ctx, len(g.pairs), 64, heatSlices, func(slice, lo, hi int) {
		if acc[slice] == nil {
			acc[slice] = make([]float64, nt*(1+np))
		}
		w := newHeatWork(ev.lin.zero, len(ev.params))
		for x := lo; x < hi; x++ {
			pr := g.pairs[x]
			w.point(ev, g, e.x, g.spec.Point(pr.i).Q, pr.w, acc[slice])
		}
	})
	if err != nil {
		return err
	}
	for t, r := range g.rows {
		var v float64
		d := make([]float64, np)
		for _, a := range acc {
			if a == nil {
				continue
			}
			v += a[t]
			for j := range np {
				d[j] += a[nt+t*np+j]
			}
		}
		e.value[r] = v * g.conv[t]
		for j := range np {
			e.jac[r*np+j] = d[j] * g.conv[t]
		}
	}
	return nil
}

// heatWork is one worker's buffers for the grid sum.
type heatWork struct {
	m    *physics.Model // the zero model: sizes
	eig  *eigen.Work
	mats [][]complex128 // D₀ and the D_j at the current point (linear.matrices)
	dbuf [][]complex128 // the charges' ∂D/∂x (linear.derivatives)
	d    []complex128   // D(x)
	tmp  []complex128
	hk   []float64 // per mode and parameter: e_kᴴ D_j e_k
	skip []bool
}

func newHeatWork(m *physics.Model, params int) *heatWork {
	n := m.ModeCount()
	return &heatWork{m: m, eig: eigen.NewWork(n), tmp: make([]complex128, n), hk: make([]float64, n*params), skip: make([]bool, n)}
}

// point adds the heat capacities (eV/K per cell, weight w) of the modes at
// q and their derivatives to acc (nt values, then nt × np derivatives).
// As the mode sum of package thermo, the p acoustic modes at Γ and modes
// of zero or imaginary frequency are left out.
func (w *heatWork) point(ev *evaluator, g *heatGroup, x []float64, q [3]float64, weight float64, acc []float64) {
	n, p := w.m.ModeCount(), w.m.Polarizations()
	w.mats = ev.lin.matrices(q, w.mats)
	w.d = ev.lin.combine(w.mats, x, w.d)
	var dD [][]complex128
	dD, w.dbuf = ev.lin.derivatives(w.mats, x, w.dbuf)
	lam, nu, vecs := solve(w.eig, w.d, q, p, ev.lin.eigenTol(x))
	for k, l := range lam {
		w.skip[k] = !(l > 0)
	}
	if physics.IsGamma(q) {
		for k, s := range gammaAcoustic(nu, p) {
			w.skip[k] = w.skip[k] || s
		}
	}
	np, nt := len(x), len(g.temps)
	for k := 0; k < n; k++ {
		if w.skip[k] {
			continue
		}
		v := vecs[k*n : (k+1)*n]
		for j := range np {
			mulVec(dD[j], v, w.tmp, n)
			w.hk[k*np+j] = real(dotc(v, w.tmp))
		}
	}
	for k := 0; k < n; k++ {
		if w.skip[k] {
			continue
		}
		dnu := physics.NuUnitTHz * physics.NuUnitTHz / (2 * nu[k]) // ∂ν/∂λ
		for t, tempK := range g.temps {
			c, dc := modeHeat(nu[k], tempK)
			acc[t] += weight * c
			f := weight * dc * dnu
			for j := range np {
				acc[nt+t*np+j] += f * w.hk[k*np+j]
			}
		}
	}
}

// modeHeat returns the heat capacity of one mode of frequency nuTHz > 0
// at tempK > 0, k x² eˣ/(eˣ − 1)² with x = hν/kT (eV/K; Einstein's
// function, as thermo's mode sum), and its derivative with respect to ν
// (eV/K per THz): k x e^(−x)/(1 − e^(−x))² (2 + x − 2x/(1 − e^(−x)))·x/ν,
// the bracket by its series −x²/6 + x⁴/360 − x⁶/15120 below x = 0.01
// (from x/(1 − e^(−x)) = Σ B⁺_n xⁿ/n!, the Bernoulli numbers) where the
// direct form cancels.
func modeHeat(nuTHz, tempK float64) (c, dc float64) {
	x := nuTHz * physics.THzToKelvin / tempK
	if x > 700 {
		return 0, 0
	}
	em := math.Exp(-x)
	d := -math.Expm1(-x) // 1 − e^(−x), accurate for small x
	base := x * em / (d * d)
	c = physics.BoltzmannEVPerK * x * base
	var br float64
	if x < 0.01 {
		x2 := x * x
		br = x2 * (-1.0/6 + x2*(1.0/360-x2/15120))
	} else {
		br = 2 + x - 2*x/d
	}
	dc = physics.BoltzmannEVPerK * base * br * x / nuTHz
	return c, dc
}
