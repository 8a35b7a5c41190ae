// The long-wavelength (elastic) limit of the acoustic branches: sound
// velocities without finite differences, and θ_D of the elastic limit.
//
// Method of long waves (M. Born & K. Huang, Dynamical Theory of Crystal
// Lattices, Oxford 1954, ch. V): along a unit direction u, with q = κu and
// the position phase convention (bond vector b = R_n + x_j − x_i; the
// eigenvalues do not depend on the convention),
//
//	Φ(κ) = Φ0 + iκ Φ1 + κ² Φ2 + O(κ³),
//	Φ0 = Σ_n Φ(0i;nj),  Φ1 = Σ_n (u·b) Φ(0i;nj),  Φ2 = −½ Σ_n (u·b)² Φ(0i;nj),
//
// in raw (not mass-weighted) force constants. An acoustic wave moves every
// site by U plus an internal displacement iκ w_i; to order κ² its energy
// per cell is κ² [UᵀΦ2U + wᵀΦ0w + 2wᵀΦ1U] (rigid translations are zero
// modes of Φ0; Φ1 is antisymmetric), the internal displacements relax to
// its minimum over w, and the kinetic energy is that of the total mass M
// moving with U. So ω² = κ² eig(C(u))/M with the p×p acoustic matrix
//
//	C(u) = Σ Φ2 − (Φ1U)ᵀ Φ0⁺ (Φ1U)   (Schur complement: internal relaxation),
//
// and v_s = sqrt(eig_s C(u)/M). C(u) = Σ_αβ u_α u_β G_αβ is quadratic in u,
// so the tensor G (3p×3p) is computed once per model and every direction
// costs a p×p eigenproblem.
//
// Two routes compute it:
//
//   - Springs only, all constants ≥ 0 (the common case): the energy is a
//     sum of squares, ½Σ_bonds |K^½((u·b)U + w_j − w_i)|² with K^½ rows
//     √k∥ e and √k⊥ (e × x̂_c) (their Gram matrix is k∥eeᵀ + k⊥(1 − eeᵀ)).
//     Minimising over w is a linear least-squares problem: a Householder QR
//     of [A_w | A_U] with rows sorted by decreasing norm and column
//     pivoting, which is row-wise backward stable (M. J. D. Powell &
//     J. K. Reid 1969; A. J. Cox & N. J. Higham, IMA J. Numer. Anal. 18,
//     1998), leaves C(u) = L(u)ᵀL(u) from the trailing triangle — no
//     subtraction, so a soft spring in series with a stiff one keeps its
//     digits. The singular values of L(u) come from one-sided Jacobi
//     rotations (J. Demmel & K. Veselić, SIAM J. Matrix Anal. Appl. 13,
//     1992), accurate to a few ε relative for the graded matrices the
//     pivoted QR leaves. Errors of a few 1e-16 relative are measured up to
//     stiffness contrasts of 1e-12, and the soft velocities stay within
//     about ε/√(contrast) relative (2e-10 at 1e-12) in the worst case: the
//     stiff springs' rounding enters a soft mode only through its own
//     (soft) rows to first order.
//   - Otherwise (explicit blocks, negative springs, or a least-squares
//     matrix over maxLongWaveEntries): from the compiled force constants,
//     G = ΣΦ2 − Yᵀ Φ0'⁺ Y with Φ0' the internal block (site 0 fixed, which
//     removes the translations) and its pseudo-inverse from a symmetric
//     eigendecomposition. The subtraction costs digits when internal
//     relaxation nearly cancels the unrelaxed stiffness: the error of v_s²
//     is about ε·‖G‖/v_s², e.g. ε·K1/K2 for two springs in series.

package physics

import (
	"context"
	"math"
	"sort"

	"github.com/materials-lab/modegrid/physics/lattice"

	"gonum.org/v1/gonum/integrate/quad"
)

// springBond is one spring of the model in factored form: site i in cell 0
// to site j at Cartesian bond vector bond (Å), constants in eV/Å².
type springBond struct {
	i, j          int
	bond          [3]float64
	kLong, kTrans float64
}

// maxLongWaveEntries bounds the dense least-squares matrix of the
// factored route (rows × columns, 8 bytes each: 32 MiB).
const maxLongWaveEntries = 1 << 22

// longWave is the elastic limit of a model: C(u) = L(u)ᵀL(u) with
// L(u) = Σ_α u_α lmat[:, αp:(α+1)p] (factored route), or C(u) = Σ_αβ u_α
// u_β G_αβ with G = gmat (3p×3p, row-major; dense route).
type longWave struct {
	ok    bool      // false: no finite long-wave limit (see SoundVelocities)
	p     int       // polarizations
	mtot  float64   // total mass of the cell, amu
	lmat  []float64 // lrows × 3p, sqrt(eV/Å²)·Å
	lrows int
	gmat  []float64 // 3p × 3p, eV
}

// longWaveLimit returns the model's elastic limit, computed once. Its
// set-up is O(sites³) (a QR factorisation, and on the dense route an
// eigendecomposition of order 3·sites: a minute and more at 512 sites);
// it polls ctx and returns ctx.Err() when ctx ends first, keeping nothing,
// so the next call starts again.
func (m *Model) longWaveLimit(ctx context.Context) (*longWave, error) {
	return m.lw.get(ctx, func(ctx context.Context) (*longWave, error) {
		lw, err := m.factoredLongWave(ctx)
		if lw != nil || err != nil {
			return lw, err
		}
		return m.denseLongWave(ctx)
	})
}

// SoundVelocities returns the speeds of sound (km/s) of the p acoustic
// branches along the Cartesian direction dir, ascending: the long-wave
// limits ω/|q| as q → 0 along dir, from the analytic expansion of D(q) to
// second order with internal relaxation (method of long waves; see the
// header of elastic.go). dir is projected onto the span of the lattice; nil
// if that projection is zero, and nil when the model has no finite
// long-wave limit: explicit blocks with an antisymmetric part whose
// first-order term Σ (u·b)Φ does not vanish make ω² linear in |q| (one
// sign of q is then unstable). An unstable acoustic branch gives a
// negative value (its imaginary slope). Explicit blocks that break the
// acoustic sum rule are taken with the rigid translations restored as zero
// modes (SumRuleViolation reports the difference). Accuracy: a few ε
// relative for spring models, independent of the stiffness contrast
// (measured to 1e-12); see the header of elastic.go for the bound of the
// general route.
//
// The first call on a model sets up the long-wave limit (O(sites³), see
// longWaveLimit) and returns ctx.Err() if ctx ends first; later calls
// cost a p×p eigenproblem.
func (m *Model) SoundVelocities(ctx context.Context, dir [3]float64) ([]float64, error) {
	if !finite3(dir) {
		panic("physics: SoundVelocities: direction is not finite")
	}
	if s := math.Max(math.Abs(dir[0]), math.Max(math.Abs(dir[1]), math.Abs(dir[2]))); s > 0 {
		dir = lattice.Scale(dir, 1/s) // any length: no overflow in the projection
	}
	var qdir [3]float64
	for k := 0; k < m.dim; k++ {
		f := lattice.Dot(dir, m.lattice[k]) / (2 * math.Pi) // fractional q of dir
		for a := 0; a < 3; a++ {
			qdir[a] += f * m.recip[k][a]
		}
	}
	l := lattice.Norm(qdir)
	if l == 0 || lattice.Norm(dir) == 0 {
		return nil, nil
	}
	u := lattice.Scale(qdir, 1/l)
	if m.longRange != nil {
		return m.polarSoundVelocities(ctx, u)
	}
	lw, err := m.longWaveLimit(ctx)
	if err != nil || !lw.ok {
		return nil, err
	}
	v2 := lw.speedsSquared(u)
	out := make([]float64, len(v2))
	for s, x := range v2 {
		// Å·sqrt(eV/Å²/amu) → km/s; the signed root for unstable branches.
		out[s] = math.Copysign(math.Sqrt(math.Abs(x)/lw.mtot), x) * VelocityUnitKmS
	}
	return out, nil
}

// speedsSquared returns the eigenvalues of C(u), ascending (eV).
func (lw *longWave) speedsSquared(u [3]float64) []float64 {
	p := lw.p
	if lw.lmat != nil {
		l := make([]float64, lw.lrows*p)
		for r := 0; r < lw.lrows; r++ {
			row := lw.lmat[r*3*p : (r+1)*3*p]
			for a := 0; a < p; a++ {
				var s float64
				for al := 0; al < 3; al++ {
					s += u[al] * row[al*p+a]
				}
				l[r*p+a] = s
			}
		}
		return oneSidedJacobi(l, lw.lrows, p)
	}
	c := make([]float64, p*p)
	for al := 0; al < 3; al++ {
		for be := 0; be < 3; be++ {
			w := u[al] * u[be]
			if w == 0 {
				continue
			}
			for a := 0; a < p; a++ {
				for b := 0; b < p; b++ {
					c[a*p+b] += w * lw.gmat[(al*p+a)*3*p+be*p+b]
				}
			}
		}
	}
	return symJacobi(c, p)
}

// factoredLongWave builds the elastic limit of a spring model by least
// squares (header of elastic.go); nil when the route does not apply, and
// ctx.Err() if ctx ends first.
func (m *Model) factoredLongWave(ctx context.Context) (*longWave, error) {
	p, ns := m.p, m.nsites
	if m.hasBlocks || len(m.springs) == 0 {
		return nil, nil
	}
	nw := p * (ns - 1) // internal displacements of sites 1.., site 0 fixed
	nc := nw + 3*p
	var rows [][]float64
	for x, sb := range m.springs {
		if x%pollEvery == 0 && ctx.Err() != nil {
			return nil, ctx.Err()
		}
		if !(sb.kLong >= 0 && sb.kTrans >= 0) {
			return nil, nil
		}
		if (len(rows)+4)*nc > maxLongWaveEntries {
			return nil, nil
		}
		e := lattice.Scale(sb.bond, 1/lattice.Norm(sb.bond))
		gs := [4][3]float64{lattice.Scale(e, math.Sqrt(sb.kLong))}
		st := math.Sqrt(sb.kTrans)
		gs[1] = [3]float64{0, st * e[2], -st * e[1]} // √k⊥ e × x̂
		gs[2] = [3]float64{-st * e[2], 0, st * e[0]} // √k⊥ e × ŷ
		gs[3] = [3]float64{st * e[1], -st * e[0], 0} // √k⊥ e × ẑ
		for _, g := range gs {
			row := make([]float64, nc)
			nz := false
			for a := 0; a < p; a++ {
				if g[a] == 0 {
					continue
				}
				nz = true
				if sb.i != sb.j {
					if sb.j > 0 {
						row[(sb.j-1)*p+a] += g[a]
					}
					if sb.i > 0 {
						row[(sb.i-1)*p+a] -= g[a]
					}
				}
				for al := 0; al < 3; al++ {
					row[nw+al*p+a] = sb.bond[al] * g[a]
				}
			}
			if nz {
				rows = append(rows, row)
			}
		}
	}
	lw := &longWave{ok: true, p: p, mtot: m.totalMassAmu()}
	var err error
	if lw.lmat, lw.lrows, err = trailingFactor(ctx, rows, nw, 3*p); err != nil {
		return nil, err
	}
	return lw, nil
}

// trailingFactor returns R̃ (k × nu, row-major) with R̃ᵀR̃ = min over x of
// the Gram matrix of the last nu columns after the first nw columns are
// projected out: A = [A_w | A_U], min_x |A_w x + A_U y|² = |R̃ y|². Rows are
// sorted by decreasing ∞-norm and columns pivoted within each block
// (row-wise backward stable Householder QR); a w column whose residual
// falls below 1e-12 of its own norm is dependent (a free internal
// translation) and dropped. The factorisation is O(rows·columns²); it
// polls ctx before every reflector and returns ctx.Err() if ctx ends first.
func trailingFactor(ctx context.Context, rows [][]float64, nw, nu int) ([]float64, int, error) {
	nc := nw + nu
	sortRowsByNorm(rows)
	nr := len(rows)
	col := func(c, from int) float64 { return colNorm(rows, c, from) }
	orig := make([]float64, nc)
	for c := range orig {
		orig[c] = col(c, 0)
	}
	perm := make([]int, nc)
	for c := range perm {
		perm[c] = c
	}
	swap := func(a, b int) {
		for _, r := range rows {
			r[a], r[b] = r[b], r[a]
		}
		perm[a], perm[b] = perm[b], perm[a]
		orig[a], orig[b] = orig[b], orig[a]
	}
	k, kw := 0, 0 // reflectors applied (= next row); those of the w block
	for bi, blk := range [2][2]int{{0, nw}, {nw, nc}} {
		for c := blk[0]; c < blk[1] && k < nr; c++ {
			if err := ctx.Err(); err != nil {
				return nil, 0, err
			}
			best, bn := -1, 0.0
			for j := c; j < blk[1]; j++ {
				if n := col(j, k); n > bn {
					best, bn = j, n
				}
			}
			if best < 0 || (bi == 0 && bn <= 1e-12*orig[best]) {
				break // the rest of the block is zero or dependent
			}
			swap(c, best)
			householder(rows, k, c, bn)
			k++
		}
		if bi == 0 {
			kw = k
		}
	}
	// R̃: the U columns of the rows from kw on (zero past row k), in the
	// original column order.
	lrows := max(k-kw, 1)
	out := make([]float64, lrows*nu)
	for r := 0; r < k-kw; r++ {
		for c := nw; c < nc; c++ {
			out[r*nu+perm[c]-nw] = rows[kw+r][c]
		}
	}
	return out, lrows, nil
}

// sortRowsByNorm orders rows by decreasing ∞-norm, stably: the row
// ordering that makes Householder QR row-wise backward stable.
func sortRowsByNorm(rows [][]float64) {
	norms := make([]float64, len(rows)) // ∞-norms, computed once for the sort
	for r, row := range rows {
		for _, v := range row {
			norms[r] = math.Max(norms[r], math.Abs(v))
		}
	}
	order := make([]int, len(rows))
	for r := range order {
		order[r] = r
	}
	sort.SliceStable(order, func(a, b int) bool { return norms[order[a]] > norms[order[b]] })
	sorted := make([][]float64, len(rows))
	for r, o := range order {
		sorted[r] = rows[o]
	}
	copy(rows, sorted)
}

// colNorm is the 2-norm of column c of rows[from:], scaled by its largest
// element so that no square overflows or underflows.
func colNorm(rows [][]float64, c, from int) float64 {
	var s, sc float64
	for r := from; r < len(rows); r++ {
		sc = math.Max(sc, math.Abs(rows[r][c]))
	}
	if sc == 0 {
		return 0
	}
	for r := from; r < len(rows); r++ {
		x := rows[r][c] / sc
		s += x * x
	}
	return sc * math.Sqrt(s)
}

// householder reflects rows[k:] so that column c is zero below row k, with
// bn the norm of rows[k:][c], and applies the reflection to the columns
// after c (Golub & Van Loan, Matrix Computations, §5.1–5.2).
func householder(rows [][]float64, k, c int, bn float64) {
	nr, nc := len(rows), len(rows[0])
	alpha := -math.Copysign(bn, rows[k][c])
	v := make([]float64, nr-k)
	for r := k; r < nr; r++ {
		v[r-k] = rows[r][c]
	}
	v[0] -= alpha
	// vᵀv = 2bn² + 2|x0|bn (no cancellation: alpha has the sign opposite x0).
	vtv := 2 * bn * (bn + math.Abs(rows[k][c]))
	for j := c + 1; j < nc; j++ {
		var s float64
		for r := k; r < nr; r++ {
			s += v[r-k] * rows[r][j]
		}
		if s == 0 {
			continue
		}
		f := 2 * s / vtv
		for r := k; r < nr; r++ {
			rows[r][j] -= f * v[r-k]
		}
	}
	rows[k][c] = alpha
	for r := k + 1; r < nr; r++ {
		rows[r][c] = 0
	}
}

// oneSidedJacobi returns the squared singular values of a (rows × cols,
// row-major; overwritten), ascending: Hestenes rotations orthogonalise the
// columns until every pair is orthogonal to ε, then the squared column
// norms are the eigenvalues of aᵀa (Demmel & Veselić 1992).
func oneSidedJacobi(a []float64, rows, cols int) []float64 {
	for sweep := 0; sweep < 60; sweep++ {
		rotated := false
		for j := 0; j < cols; j++ {
			for k := j + 1; k < cols; k++ {
				var al, be, ga float64
				for r := 0; r < rows; r++ {
					x, y := a[r*cols+j], a[r*cols+k]
					al += x * x
					be += y * y
					ga += x * y
				}
				if ga == 0 || math.Abs(ga) <= 1e-17*math.Sqrt(al)*math.Sqrt(be) {
					continue
				}
				rotated = true
				zeta := (be - al) / (2 * ga)
				t := math.Copysign(1, zeta) / (math.Abs(zeta) + math.Hypot(1, zeta))
				cs := 1 / math.Hypot(1, t)
				sn := cs * t
				for r := 0; r < rows; r++ {
					x, y := a[r*cols+j], a[r*cols+k]
					a[r*cols+j] = cs*x - sn*y
					a[r*cols+k] = sn*x + cs*y
				}
			}
		}
		if !rotated {
			break
		}
	}
	out := make([]float64, cols)
	for j := range out {
		var s float64
		for r := 0; r < rows; r++ {
			s += a[r*cols+j] * a[r*cols+j]
		}
		out[j] = s
	}
	sort.Float64s(out)
	return out
}

// symJacobi returns the eigenvalues of the symmetric n×n matrix a
// (row-major; overwritten), ascending, by cyclic Jacobi rotations (Golub &
// Van Loan §8.5), which are exact on a diagonal matrix and accurate to a
// few ε relative on a scaled diagonally dominant one.
func symJacobi(a []float64, n int) []float64 {
	for sweep := 0; sweep < 60; sweep++ {
		rotated := false
		for p := 0; p < n; p++ {
			for q := p + 1; q < n; q++ {
				apq := a[p*n+q]
				if apq == 0 || math.Abs(apq) <= 1e-17*math.Sqrt(math.Abs(a[p*n+p]*a[q*n+q])) {
					continue
				}
				rotated = true
				theta := (a[q*n+q] - a[p*n+p]) / (2 * apq)
				t := math.Copysign(1, theta) / (math.Abs(theta) + math.Hypot(1, theta))
				c := 1 / math.Hypot(1, t)
				s := c * t
				for k := 0; k < n; k++ { // columns p, q
					x, y := a[k*n+p], a[k*n+q]
					a[k*n+p] = c*x - s*y
					a[k*n+q] = s*x + c*y
				}
				for k := 0; k < n; k++ { // rows p, q
					x, y := a[p*n+k], a[q*n+k]
					a[p*n+k] = c*x - s*y
					a[q*n+k] = s*x + c*y
				}
				a[p*n+q], a[q*n+p] = 0, 0
			}
		}
		if !rotated {
			break
		}
	}
	out := make([]float64, n)
	for k := range out {
		out[k] = a[k*n+k]
	}
	sort.Float64s(out)
	return out
}

// totalMassAmu is the mass of the cell.
func (m *Model) totalMassAmu() float64 {
	var s float64
	for _, x := range m.massAmu {
		s += x
	}
	return s
}

// denseLongWave builds the elastic limit from the compiled force constants
// (the general route of the header): G = ΣΦ2 − Yᵀ Φ0'⁺ Y. ok is false when
// the first-order term Σ (u·b)Φ over the whole cell does not vanish. It
// returns ctx.Err() if ctx ends first.
func (m *Model) denseLongWave(ctx context.Context) (*longWave, error) {
	p, ns := m.p, m.nsites
	np := 3 * p
	lw := &longWave{p: p, mtot: m.totalMassAmu(), gmat: make([]float64, np*np)}
	nw := p * (ns - 1)
	y := make([]float64, p*ns*np) // Y[(i,a), (α,c)] = Σ_jn b_α Φ_ac(0i;nj)
	phi0 := make([]float64, nw*nw)
	var mag float64 // Σ |b| |Φ|: the scale of the first-order test
	for x, t := range m.terms {
		if x%pollEvery == 0 && ctx.Err() != nil {
			return nil, ctx.Err()
		}
		w := math.Sqrt(m.massAmu[t.i] * m.massAmu[t.j])
		b := lattice.Sub(lattice.Add(m.pos[t.j], m.latticeVec(t.n)), m.pos[t.i])
		for a := 0; a < p; a++ {
			for c := 0; c < p; c++ {
				f := t.phi[3*a+c] * w // raw Φ, eV/Å²
				if t.i > 0 && t.j > 0 {
					phi0[((t.i-1)*p+a)*nw+(t.j-1)*p+c] += f
				}
				mag += math.Abs(f) * lattice.Norm(b)
				for al := 0; al < 3; al++ {
					y[(t.i*p+a)*np+al*p+c] += b[al] * f
					for be := 0; be < 3; be++ {
						lw.gmat[(al*p+a)*np+be*p+c] -= 0.5 * b[al] * b[be] * f
					}
				}
			}
		}
	}
	// First-order term Σ_i Y_i: zero for symmetric blocks.
	for a := 0; a < p; a++ {
		for k := 0; k < np; k++ {
			var s float64
			for i := 0; i < ns; i++ {
				s += y[(i*p+a)*np+k]
			}
			if math.Abs(s) > 1e-10*mag {
				return lw, nil
			}
		}
	}
	rows, err := psdRows(ctx, phi0, y[p*np:], lw.gmat, nw, np)
	if err != nil {
		return nil, err
	}
	if rows != nil {
		// Stable on every gradient: the least-squares route on a square
		// root of the energy form, whose C(u) = L(u)ᵀL(u) is never
		// negative.
		if lw.lmat, lw.lrows, err = trailingFactor(ctx, rows, nw, np); err != nil {
			return nil, err
		}
		lw.gmat = nil
		lw.ok = true
		return lw, nil
	}
	if nw > 0 {
		relax, err := relaxation(ctx, phi0, y[p*np:], nw, np)
		if err != nil {
			return nil, err
		}
		for k := range lw.gmat {
			lw.gmat[k] -= relax[k]
		}
	}
	for k := 0; k < np; k++ { // symmetrise
		for l := 0; l < k; l++ {
			s := 0.5 * (lw.gmat[k*np+l] + lw.gmat[l*np+k])
			lw.gmat[k*np+l], lw.gmat[l*np+k] = s, s
		}
	}
	lw.ok = true
	return lw, nil
}

// psdRows returns rows B with BᵀB = H, the energy form over (w, U_α) —
// H = [[Φ0', Y], [Yᵀ, G2]] — from its eigendecomposition, B = Λ^½Vᵀ, or
// nil when H has an eigenvalue below −64ε of its largest (an energy that
// falls along some displacement gradient; the subtraction route then
// gives the signed result). It returns ctx.Err() if ctx ends first.
func psdRows(ctx context.Context, phi0, y, g2 []float64, nw, np int) ([][]float64, error) {
	n := nw + np
	w := newSymEigen(n)
	for i := 0; i < nw; i++ {
		for j := 0; j <= i; j++ {
			w.set(i, j, 0.5*(phi0[i*nw+j]+phi0[j*nw+i]))
		}
	}
	for k := 0; k < np; k++ {
		for i := 0; i < nw; i++ {
			w.set(nw+k, i, y[i*np+k])
		}
		for l := 0; l <= k; l++ {
			w.set(nw+k, nw+l, 0.5*(g2[k*np+l]+g2[l*np+k]))
		}
	}
	ok, err := w.solve(ctx)
	if !ok || err != nil {
		return nil, err
	}
	var big float64
	for _, v := range w.vals {
		big = math.Max(big, math.Abs(v))
	}
	var rows [][]float64
	for k, v := range w.vals {
		if v < -64*dlamchE*big {
			return nil, nil
		}
		if v <= 0 {
			continue
		}
		r := make([]float64, n)
		s := math.Sqrt(v)
		for i := range r {
			r[i] = s * w.vector(k, i)
		}
		rows = append(rows, r)
	}
	return rows, nil
}

// dlamchE is the unit roundoff of float64, 2⁻⁵³.
const dlamchE = 1.0 / (1 << 53)

// relaxation returns Yᵀ Φ0⁺ Y (np × np) for the symmetric nw×nw Φ0 and
// the nw×np Y, with the pseudo-inverse from a symmetric eigendecomposition
// (eigenvalues below 1e-12 of the largest in magnitude are zero modes and
// left out).
func relaxation(ctx context.Context, phi0, y []float64, nw, np int) ([]float64, error) {
	out := make([]float64, np*np)
	w := newSymEigen(nw)
	for i := 0; i < nw; i++ {
		for j := 0; j <= i; j++ {
			w.set(i, j, phi0[j*nw+i]) // the upper triangle, as given
		}
	}
	ok, err := w.solve(ctx)
	if !ok || err != nil {
		return out, err
	}
	var big float64
	for _, v := range w.vals {
		big = math.Max(big, math.Abs(v))
	}
	// Z = Vᵀ Y; Yᵀ Φ0⁺ Y = Σ_k Z_k Z_kᵀ / λ_k.
	row := make([]float64, np)
	for k, v := range w.vals {
		if math.Abs(v) <= 1e-12*big {
			continue
		}
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		clear(row)
		for i := 0; i < nw; i++ {
			vi := w.vector(k, i)
			for a := 0; a < np; a++ {
				row[a] += vi * y[i*np+a]
			}
		}
		for a := 0; a < np; a++ {
			for b := 0; b < np; b++ {
				out[a*np+b] += row[a] * row[b] / v
			}
		}
	}
	return out, nil
}

// ElasticDebyeTemperature returns θ_D (K) from the sound velocities of the
// acoustic branches in the elastic (long-wavelength) limit: the Debye model
// whose low-frequency DOS matches the model's, g(ν) = V S_d ν^(d−1) Σ_s
// ⟨v_s^(−d)⟩ per cell, holding all p·sites modes (Kittel ch. 5;
// Ashcroft & Mermin ch. 23): ν_D^d = d·p·sites / (V S_d Σ_s ⟨v_s^(−d)⟩),
// θ = hν_D/k, with V the cell volume (length, area) and S_d = 2, 2π, 4π.
// The direction average is exact for d = 1, a 64-point trapezoid rule on
// the circle for d = 2 and a 16×32 Gauss–Legendre × trapezoid product rule
// on the sphere for d = 3. It is 0 when undefined: p < d, a non-positive
// or imaginary acoustic velocity, or no lattice. It returns ctx.Err() if
// ctx ends during the set-up of the long-wave limit.
func (m *Model) ElasticDebyeTemperature(ctx context.Context) (float64, error) {
	d, p := m.Dim(), m.Polarizations()
	if p < d || d < 1 || d > 3 {
		return 0, nil
	}
	basis := latticeSpanBasis(m)
	type dirW struct {
		dir [3]float64
		w   float64
	}
	var dirs []dirW
	switch d {
	case 1:
		dirs = []dirW{{basis[0], 0.5}, {[3]float64{-basis[0][0], -basis[0][1], -basis[0][2]}, 0.5}}
	case 2:
		const nphi = 64
		for j := 0; j < nphi; j++ {
			phi := 2 * math.Pi * float64(j) / nphi
			var v [3]float64
			for a := 0; a < 3; a++ {
				v[a] = math.Cos(phi)*basis[0][a] + math.Sin(phi)*basis[1][a]
			}
			dirs = append(dirs, dirW{v, 1.0 / nphi})
		}
	default:
		const nmu, nphi = 16, 32
		mu := make([]float64, nmu)
		wmu := make([]float64, nmu)
		quad.Legendre{}.FixedLocations(mu, wmu, -1, 1)
		for i := range mu {
			st := math.Sqrt(1 - mu[i]*mu[i])
			for j := 0; j < nphi; j++ {
				phi := 2 * math.Pi * (float64(j) + 0.5) / nphi
				var v [3]float64
				for a := 0; a < 3; a++ {
					v[a] = st*math.Cos(phi)*basis[0][a] + st*math.Sin(phi)*basis[1][a] + mu[i]*basis[2][a]
				}
				dirs = append(dirs, dirW{v, wmu[i] / 2 / nphi})
			}
		}
	}
	sum := 0.0 // Σ_s ⟨v_s^(−d)⟩, (Å·THz)^(−d)
	for _, dw := range dirs {
		vs, err := acousticSpeedsATHz(ctx, m, dw.dir)
		if err != nil {
			return 0, err
		}
		if len(vs) != p {
			return 0, nil
		}
		for _, v := range vs {
			if !(v > 0) {
				return 0, nil
			}
			sum += dw.w * math.Pow(v, -float64(d))
		}
	}
	sd := [4]float64{0, 2, 2 * math.Pi, 4 * math.Pi}[d]
	vol := cellMeasure(m)
	nuD := math.Pow(float64(d*p*m.Sites())/(vol*sd*sum), 1/float64(d))
	return nuD * THzToKelvin, nil
}

// acousticSpeedsATHz returns the sound velocities of the p acoustic
// branches along the Cartesian unit vector dir in Å·THz (Model.
// SoundVelocities gives km/s; 1 km/s = 10 Å·THz), the unit in which
// ν = v|q|/2π with q in Å⁻¹.
func acousticSpeedsATHz(ctx context.Context, m *Model, dir [3]float64) ([]float64, error) {
	v, err := m.SoundVelocities(ctx, dir)
	for s := range v {
		v[s] *= 10
	}
	return v, err
}

// latticeSpanBasis returns an orthonormal basis (Gram–Schmidt) of the
// space spanned by the d lattice vectors; rows past d complete it to R³
// only for d = 3.
func latticeSpanBasis(m *Model) [3][3]float64 {
	lat := m.Lattice()
	var b [3][3]float64
	for k := 0; k < m.Dim(); k++ {
		v := lat[k]
		for j := 0; j < k; j++ {
			c := lattice.Dot(v, b[j])
			for a := 0; a < 3; a++ {
				v[a] -= c * b[j][a]
			}
		}
		l := lattice.Norm(v)
		for a := 0; a < 3; a++ {
			b[k][a] = v[a] / l
		}
	}
	return b
}

// cellMeasure is the length, area or volume of the cell (Å^d): the square
// root of the Gram determinant of the lattice vectors.
func cellMeasure(m *Model) float64 {
	lat := m.Lattice()
	return lattice.GramMeasure(lat[:m.Dim()])
}
