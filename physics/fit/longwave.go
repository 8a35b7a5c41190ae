// Sound velocities and elastic constants: the long-wave limit of the model
// (physics.LongWaveForms, method of long waves) and its derivatives.

package fit

import (
	"context"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/lattice"
)

// velDatum is one measured speed of sound.
type velDatum struct {
	row    int
	u      [3]float64 // unit Cartesian direction within the lattice's span
	branch int        // 1-based among the acoustic branches; 0: assigned
	pol    Polarization
}

// elasticDatum is one measured elastic constant.
type elasticDatum struct {
	row int
	k   int // index of C_IJ in voigtPairs
}

// setupLongWave adds the rows of the velocities and elastic constants and
// projects the directions onto the lattice's span as
// physics.Model.SoundVelocities does. A direction with no component in
// the span is a violation.
func (ev *evaluator) setupLongWave(p *Problem, m *physics.Model, vs *physics.Violations) {
	for i, v := range p.SoundVelocities {
		f := fmt.Sprintf("sound_velocities[%d]", i)
		r := ev.addRow(f, v.KmS, v.SigmaKmS)
		u, ok := spanDirection(m, v.Dir)
		if !ok {
			vs.Add(f+".direction", "(%v, %v, %v) has no component along the crystal's %d lattice vectors", v.Dir[0], v.Dir[1], v.Dir[2], m.Dim())
		}
		ev.vels = append(ev.vels, velDatum{row: r, u: u, branch: v.Branch, pol: v.Polarization})
	}
	for i, c := range p.ElasticConstants {
		r := ev.addRow(fmt.Sprintf("elastic_constants[%d]", i), c.GPa, c.SigmaGPa)
		ev.elastic = append(ev.elastic, elasticDatum{row: r, k: voigtIndex(c.I-1, c.J-1)})
	}
}

// spanDirection is the unit wavevector direction of the Cartesian
// direction dir: its projection onto the span of the lattice vectors
// (through the fractional q of dir), as SoundVelocities takes it.
func spanDirection(m *physics.Model, dir [3]float64) ([3]float64, bool) {
	if s := math.Max(math.Abs(dir[0]), math.Max(math.Abs(dir[1]), math.Abs(dir[2]))); s > 0 {
		dir = lattice.Scale(dir, 1/s)
	}
	lat, rec := m.Lattice(), m.Reciprocal()
	var q [3]float64
	for k := 0; k < m.Dim(); k++ {
		f := lattice.Dot(dir, lat[k]) / (2 * math.Pi)
		for a := 0; a < 3; a++ {
			q[a] += f * rec[k][a]
		}
	}
	l := lattice.Norm(q)
	if !(l > 1e-12) {
		return [3]float64{}, false
	}
	return lattice.Scale(q, 1/l), true
}

// relaxed is the elastic limit of a model: the tensor G (3p × 3p,
// row (α,a), column (β,c), eV) with C(u) = Σ u_α u_β G_αβ and the
// internal relaxation W (internal displacements of sites 1.. per unit
// (α,c), site 0 held).
type relaxed struct {
	p, nw int
	g     []float64 // 3p × 3p
	w     []float64 // nw × 3p
}

// relax computes G = G2 − Y'ᵀΦ0'⁺Y' and W = −Φ0'⁺Y' from the forms (Y',
// Φ0': the rows and columns of sites 1..), the pseudo-inverse from a
// symmetric eigendecomposition with eigenvalues below 1e-12 of the
// largest left out (free internal translations), as the core's dense
// route. ok is false when the first-order term Σ_i Y_i does not vanish:
// the model has no finite long-wave limit.
func relax(f *physics.LongWaveForms) (*relaxed, bool) {
	p, ns := f.P, f.Sites
	np, n := 3*p, p*ns
	for a := 0; a < p; a++ {
		for k := 0; k < np; k++ {
			var s float64
			for i := 0; i < ns; i++ {
				s += f.Y[(i*p+a)*np+k]
			}
			if math.Abs(s) > 1e-10*f.YScale {
				return nil, false
			}
		}
	}
	nw := n - p
	r := &relaxed{p: p, nw: nw, g: append([]float64(nil), f.G2...), w: make([]float64, nw*np)}
	if nw == 0 {
		return r, true
	}
	phi := mat.NewSymDense(nw, nil)
	for i := 0; i < nw; i++ {
		for j := 0; j <= i; j++ {
			phi.SetSym(i, j, 0.5*(f.Phi0[(p+i)*n+p+j]+f.Phi0[(p+j)*n+p+i]))
		}
	}
	var es mat.EigenSym
	if !es.Factorize(phi, true) {
		return nil, false
	}
	vals := es.Values(nil)
	var vecs mat.Dense
	es.VectorsTo(&vecs)
	big := 0.0
	for _, v := range vals {
		big = math.Max(big, math.Abs(v))
	}
	yp := f.Y[p*np:] // rows of sites 1..
	z := make([]float64, np)
	for k, v := range vals {
		if math.Abs(v) <= 1e-12*big {
			continue
		}
		clear(z) // z = v_kᵀ Y'
		for i := 0; i < nw; i++ {
			vi := vecs.At(i, k)
			for c := 0; c < np; c++ {
				z[c] += vi * yp[i*np+c]
			}
		}
		for i := 0; i < nw; i++ { // W −= v_k z / λ_k
			vi := vecs.At(i, k) / v
			for c := 0; c < np; c++ {
				r.w[i*np+c] -= vi * z[c]
			}
		}
	}
	// G += Y'ᵀ W
	for i := 0; i < nw; i++ {
		for a := 0; a < np; a++ {
			ya := yp[i*np+a]
			for c := 0; c < np; c++ {
				r.g[a*np+c] += ya * r.w[i*np+c]
			}
		}
	}
	return r, true
}

// derivative returns ∂G for the unit forms f of one parameter:
// G2_f + WᵀY'_f + Y'_fᵀW + WᵀΦ0'_f W (the derivative of the relaxed
// minimum; the relaxation itself does not move to first order).
func (r *relaxed) derivative(f *physics.LongWaveForms) []float64 {
	p, nw := r.p, r.nw
	np, n := 3*p, p*f.Sites
	out := append([]float64(nil), f.G2...)
	yp := f.Y[p*np:]
	pw := make([]float64, nw*np) // Φ0'_f W
	for i := 0; i < nw; i++ {
		for j := 0; j < nw; j++ {
			x := f.Phi0[(p+i)*n+p+j]
			if x == 0 {
				continue
			}
			for c := 0; c < np; c++ {
				pw[i*np+c] += x * r.w[j*np+c]
			}
		}
	}
	for i := 0; i < nw; i++ {
		for a := 0; a < np; a++ {
			wa, ya := r.w[i*np+a], yp[i*np+a]
			for c := 0; c < np; c++ {
				out[a*np+c] += wa*yp[i*np+c] + ya*r.w[i*np+c] + wa*pw[i*np+c]
			}
		}
	}
	return out
}

// christoffel returns C(u) = Σ u_α u_β G_αβ (p × p, symmetrised), eV.
func christoffel(g []float64, p int, u [3]float64) []float64 {
	np := 3 * p
	c := make([]float64, p*p)
	for al := 0; al < 3; al++ {
		for be := 0; be < 3; be++ {
			w := u[al] * u[be]
			if w == 0 {
				continue
			}
			for a := 0; a < p; a++ {
				for b := 0; b < p; b++ {
					c[a*p+b] += w * g[(al*p+a)*np+be*p+b]
				}
			}
		}
	}
	for a := 0; a < p; a++ {
		for b := 0; b < a; b++ {
			s := 0.5 * (c[a*p+b] + c[b*p+a])
			c[a*p+b], c[b*p+a] = s, s
		}
	}
	return c
}

// evalLongWave fills the velocity and elastic-constant rows of e.
func (ev *evaluator) evalLongWave(ctx context.Context, e *evaluation) error {
	if len(ev.vels)+len(ev.elastic) == 0 {
		return ctx.Err()
	}
	r, ok := relax(ev.lin.forms(e.x))
	if !ok {
		return fmt.Errorf("%w: the model has no finite long-wave limit (its explicit blocks make ω² linear in |q|), so it has no sound velocities or elastic constants", errInvalidStep)
	}
	dG := make([][]float64, len(ev.lin.unitForms))
	for j, f := range ev.lin.unitForms {
		dG[j] = r.derivative(f)
	}
	ev.evalVelocities(e, r, dG)
	ev.evalElastic(e, r, dG)
	return ctx.Err()
}

// evalVelocities fills the velocity rows: the speeds of the acoustic
// branches along each direction, assigned, and their derivatives.
func (ev *evaluator) evalVelocities(e *evaluation, r *relaxed, dG [][]float64) {
	p, np := r.p, len(ev.params)
	mass := 0.0
	m := ev.lin.zero
	for i := 0; i < m.Sites(); i++ {
		mass += m.MassAmu(i)
	}
	groups := map[[3]float64][]int{}
	var order [][3]float64
	for x, d := range ev.vels {
		if _, ok := groups[d.u]; !ok {
			order = append(order, d.u)
		}
		groups[d.u] = append(groups[d.u], x)
	}
	for _, u := range order {
		vals, vecs := symEigen(christoffel(r.g, p, u), p)
		speed := make([]float64, p)
		long := make([]float64, p)
		for s, c := range vals {
			speed[s] = math.Copysign(math.Sqrt(math.Abs(c)/mass), c) * physics.VelocityUnitKmS
			var l float64
			for a := 0; a < p; a++ {
				l += u[a] * real(vecs[s*p+a])
			}
			long[s] = l * l
		}
		idx := groups[u]
		items := make([]item, len(idx))
		for i, x := range idx {
			r := ev.rows[ev.vels[x].row]
			items[i] = item{obs: r.y, sigma: r.sigma, branch: ev.vels[x].branch, pol: ev.vels[x].pol}
		}
		branches := assign(items, speed, long, nil)
		dC := make([][]complex128, np)
		for j := range dG {
			dC[j] = realToComplex(christoffel(dG[j], p, u))
		}
		tol := 1e-8*math.Max(math.Abs(vals[0]), math.Abs(vals[p-1])) + 1e-300
		for i, x := range idx {
			b, row := branches[i], ev.vels[x].row
			e.value[row], e.branch[row] = speed[b], b+1
			if vals[b] == 0 {
				continue
			}
			h := eigenDerivatives(dC, vecs, vals, b, p, tol)
			scale := physics.VelocityUnitKmS / (2 * math.Sqrt(math.Abs(vals[b])*mass))
			for j := range np {
				e.jac[row*np+j] = h[j] * scale
			}
		}
	}
}

// symEigen returns the eigenvalues (ascending) and eigenvectors
// (mode-major, as complex numbers for eigenDerivatives) of the symmetric
// n×n matrix a.
func symEigen(a []float64, n int) ([]float64, []complex128) {
	var es mat.EigenSym
	if !es.Factorize(mat.NewSymDense(n, append([]float64(nil), a...)), true) {
		nan := make([]float64, n)
		for i := range nan {
			nan[i] = math.NaN()
		}
		return nan, make([]complex128, n*n)
	}
	vals := es.Values(nil)
	var v mat.Dense
	es.VectorsTo(&v)
	vecs := make([]complex128, n*n)
	for k := 0; k < n; k++ {
		for c := 0; c < n; c++ {
			vecs[k*n+c] = complex(v.At(c, k), 0)
		}
	}
	return vals, vecs
}

func realToComplex(a []float64) []complex128 {
	out := make([]complex128, len(a))
	for i, x := range a {
		out[i] = complex(x, 0)
	}
	return out
}

// evalElastic fills the elastic-constant rows: the Voigt constants of the
// relaxed tensor G over the cell volume, and their derivatives.
func (ev *evaluator) evalElastic(e *evaluation, r *relaxed, dG [][]float64) {
	if len(ev.elastic) == 0 {
		return
	}
	lat := ev.lin.zero.Lattice()
	scale := gpaPerEVPerA3 / lattice.GramMeasure(lat[:3])
	c := voigtFromG(r.g)
	dc := make([][21]float64, len(dG))
	for j := range dG {
		dc[j] = voigtFromG(dG[j])
	}
	np := len(ev.params)
	for _, d := range ev.elastic {
		e.value[d.row] = c[d.k] * scale
		for j := range np {
			e.jac[d.row*np+j] = dc[j][d.k] * scale
		}
	}
}

// gpaPerEVPerA3 is 1 eV/Å³ in GPa: e / (1e-30 m³) / 1e9 (CODATA 2018, exact).
const gpaPerEVPerA3 = physics.ElementaryChargeC / (physics.AngstromM * physics.AngstromM * physics.AngstromM) / 1e9
