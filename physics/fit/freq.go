// Frequencies: dispersion points and Γ frequencies, their branches and
// their derivatives by the Hellmann–Feynman theorem.

package fit

import (
	"context"
	"fmt"
	"math"
	"math/cmplx"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/eigen"
	"github.com/materials-lab/modegrid/physics/internal/parallel"
)

// freqDatum is one measured frequency.
type freqDatum struct {
	row    int
	branch int // 1-based; 0: assigned at every evaluation
	pol    Polarization
}

// qGroup is the data measured at one wavevector: the modes are computed
// once for all of them, and unlabelled ones are assigned one to one.
type qGroup struct {
	q     [3]float64
	gamma bool
	hints bool // some datum has a polarisation hint
	data  []freqDatum
	mats  [][]complex128 // D₀(q) and the D_j(q), kept when small (cacheMatrices); nil: assembled per evaluation
}

// maxCachedMatrixBytes bounds the dynamical matrices kept per wavevector
// across evaluations (they do not change: only their combination does).
const maxCachedMatrixBytes = 32 << 20

// cacheMatrices assembles D₀ and the D_j at every wavevector once, when
// they fit maxCachedMatrixBytes.
func (ev *evaluator) cacheMatrices() {
	n := int64(ev.lin.zero.ModeCount())
	if int64(len(ev.freqs))*int64(ev.lin.count())*16*n*n > maxCachedMatrixBytes {
		return
	}
	for g := range ev.freqs {
		ev.freqs[g].mats = ev.lin.matrices(ev.freqs[g].q, nil)
	}
}

// setupFrequencies adds the rows of the dispersion points and the Γ
// frequencies, grouped by wavevector.
func (ev *evaluator) setupFrequencies(p *Problem) []qGroup {
	index := map[[3]float64]int{}
	var groups []qGroup
	add := func(q [3]float64, d freqDatum) {
		g, ok := index[q]
		if !ok {
			g = len(groups)
			index[q] = g
			groups = append(groups, qGroup{q: q, gamma: physics.IsGamma(q)})
		}
		groups[g].data = append(groups[g].data, d)
		groups[g].hints = groups[g].hints || d.pol != AnyPolarization
	}
	for i, f := range p.Frequencies {
		r := ev.addRow(fmt.Sprintf("frequencies[%d]", i), f.FreqTHz, f.SigmaTHz)
		add(f.Q, freqDatum{row: r, branch: f.Branch, pol: f.Polarization})
	}
	for i, g := range p.GammaFrequencies {
		r := ev.addRow(fmt.Sprintf("gamma_frequencies[%d]", i), g.FreqTHz, g.SigmaTHz)
		add([3]float64{}, freqDatum{row: r, branch: g.Branch})
	}
	return groups
}

// checkFrequencies adds what the model's size makes wrong with the
// frequency data: a branch past the modes, Γ data for a model without
// optical modes.
func (ev *evaluator) checkFrequencies(vs *physics.Violations, groups []qGroup, modes, p int) {
	for _, g := range groups {
		for _, d := range g.data {
			f := ev.rows[d.row].field
			if d.branch > modes {
				vs.Add(f+".branch", "branch %d; the model has %d branches", d.branch, modes)
			}
			if g.gamma && modes <= p {
				vs.Add(f, "the model has no optical modes: its %d branches are all acoustic, zero at Γ", modes)
			}
		}
	}
}

// evalFrequencies fills the frequency rows of e: the modes at every
// wavevector (on all cores), the branches, and ∂ν/∂x.
func (ev *evaluator) evalFrequencies(ctx context.Context, e *evaluation) error {
	groups := ev.freqs
	if len(groups) == 0 {
		return nil
	}
	return parallel.Chunks(ctx, len(groups), 1, func(lo, hi int) {
		for g := lo; g < hi; g++ {
			ev.evalGroup(&groups[g], e)
		}
	})
}

// evalGroup computes the data of one wavevector.
func (ev *evaluator) evalGroup(g *qGroup, e *evaluation) {
	m := ev.lin.zero
	n, np := m.ModeCount(), len(ev.params)
	mats := g.mats
	if mats == nil {
		mats = ev.lin.matrices(g.q, nil)
	}
	lam, nu, vecs := solve(eigen.NewWork(n), ev.lin.combine(mats, e.x, nil), g.q, m.Polarizations(), ev.lin.eigenTol(e.x))
	var long []float64
	if g.hints {
		long = longitudinalFractions(m, g.q, vecs)
	}
	var excluded []bool
	if g.gamma {
		excluded = gammaAcoustic(nu, m.Polarizations())
	}
	items := make([]item, len(g.data))
	for i, d := range g.data {
		items[i] = item{obs: ev.rows[d.row].y, sigma: ev.rows[d.row].sigma, branch: d.branch, pol: d.pol}
	}
	branches := assign(items, nu, long, excluded)
	tol := degeneracyTol(lam, ev.lin.eigenTol(e.x))
	dD, _ := ev.lin.derivatives(mats, e.x, nil)
	for i, d := range g.data {
		b := branches[i]
		e.value[d.row], e.branch[d.row] = nu[b], b+1
		if nu[b] == 0 {
			continue // a zero mode: its frequency is pinned (∂ν/∂λ infinite at 0, and λ stays 0)
		}
		h := eigenDerivatives(dD, vecs, lam, b, n, tol)
		scale := physics.NuUnitTHz * physics.NuUnitTHz / (2 * math.Abs(nu[b]))
		for j := range np {
			e.jac[d.row*np+j] = h[j] * scale
		}
	}
}

func sq(x float64) float64 { return x * x }

// degeneracyTol is the eigenvalue difference (eV/Å²/amu) within which
// modes count as degenerate for the derivatives: 1e-8 of the largest
// |λ| plus 16 times the solver's tolerance eigTol.
func degeneracyTol(lam []float64, eigTol float64) float64 {
	big := 0.0
	for _, l := range lam {
		big = math.Max(big, math.Abs(l))
	}
	return 1e-8*big + 16*eigTol
}

// eigenDerivatives returns ∂λ_b/∂x_j for every parameter j from the
// derivative matrices dD[j] (n×n, full) and the eigenvectors vecs
// (mode-major) with eigenvalues lam: eᴴ(∂D)e (Hellmann–Feynman) for a
// non-degenerate mode; within a degenerate group (eigenvalues within tol
// of each other, chained) the eigenvalues of the group's matrix
// E_gᴴ(∂D)E_g, ascending, the one at b's place in the group — the
// derivative of the b-th eigenvalue along +x_j (first-order degenerate
// perturbation theory; the group splits as those eigenvalues).
func eigenDerivatives(dD [][]complex128, vecs []complex128, lam []float64, b, n int, tol float64) []float64 {
	lo, hi := b, b+1
	for lo > 0 && lam[lo]-lam[lo-1] <= tol {
		lo--
	}
	for hi < n && lam[hi]-lam[hi-1] <= tol {
		hi++
	}
	out := make([]float64, len(dD))
	g := hi - lo
	tmp := make([]complex128, n)
	mg := make([]complex128, g*g)
	for j, d := range dD {
		for a := 0; a < g; a++ {
			mulVec(d, vecs[(lo+a)*n:(lo+a+1)*n], tmp, n)
			for c := 0; c <= a; c++ {
				// (E_gᴴ D E_g)[c][a] = e_cᴴ (D e_a); the lower triangle at [a][c] is its conjugate.
				mg[a*g+c] = cmplx.Conj(dotc(vecs[(lo+c)*n:(lo+c+1)*n], tmp))
			}
		}
		if g == 1 {
			out[j] = real(mg[0])
			continue
		}
		vals, _ := eigen.Hermitian(mg, g, false)
		out[j] = vals[b-lo]
	}
	return out
}

// mulVec sets y = A x for the n×n row-major A.
func mulVec(a, x, y []complex128, n int) {
	for r := 0; r < n; r++ {
		var s complex128
		row := a[r*n : (r+1)*n]
		for c, v := range row {
			s += v * x[c]
		}
		y[r] = s
	}
}

// dotc is xᴴy.
func dotc(x, y []complex128) complex128 {
	var s complex128
	for i, v := range x {
		s += cmplx.Conj(v) * y[i]
	}
	return s
}

// gammaAcoustic marks the p modes of smallest |ν| at Γ: the acoustic
// modes, never assigned to a measured frequency.
func gammaAcoustic(nu []float64, p int) []bool {
	out := make([]bool, len(nu))
	for range min(p, len(nu)) {
		best := -1
		for k, f := range nu {
			if !out[k] && (best < 0 || math.Abs(f) < math.Abs(nu[best])) {
				best = k
			}
		}
		out[best] = true
	}
	return out
}

// longitudinalFractions returns, per mode, the share of its
// mass-weighted displacement (the eigenvector of D) along q̂:
// Σ_sites |q̂·e_s|² over the first p axes (1 for a purely longitudinal
// mode, 0 for a purely transverse one).
func longitudinalFractions(m *physics.Model, q [3]float64, vecs []complex128) []float64 {
	b := m.Reciprocal()
	var qc [3]float64
	for k := 0; k < 3; k++ {
		for a := 0; a < 3; a++ {
			qc[a] += q[k] * b[k][a]
		}
	}
	l := math.Sqrt(qc[0]*qc[0] + qc[1]*qc[1] + qc[2]*qc[2])
	n, p := m.ModeCount(), m.Polarizations()
	out := make([]float64, n)
	for k := 0; k < n; k++ {
		v := vecs[k*n : (k+1)*n]
		for s := 0; s < m.Sites(); s++ {
			var z complex128
			for a := 0; a < p; a++ {
				z += complex(qc[a]/l, 0) * v[s*p+a]
			}
			out[k] += real(z)*real(z) + imag(z)*imag(z)
		}
	}
	return out
}
