// The dynamical matrix D(q) and its derivative ∂D/∂q, assembled from the
// compiled force constants.
//
// D is Hermitian, so only its lower triangle is built: a block of sites
// i > j from every directed term (i, j, n), and a diagonal block i = i from
// each pair of cells ±n folded into one term. Terms are grouped by cell
// offset n so that the phase exp(2πi q·n) is computed once per cell, as a
// product of per-axis powers of exp(2πi qₖ) (two complex products, no
// trigonometry per cell).

package physics

import (
	"math"

	"github.com/materials-lab/modegrid/physics/eigen"
)

// dmBlock is one p×p block of the lower triangle of D(q) contributed by one
// cell offset: rows of site i, columns of site j ≤ i, in eV/Å²/amu. For
// i > j it adds φ·e^{iθ}; for i = j it adds S cos θ + i A sin θ on and
// below the diagonal, which is Φ(n)e^{iθ} + Φ(−n)e^{−iθ} with Φ(−n) = Φ(n)ᵀ
// (for n = 0, S is Φ(0) and A is 0).
type dmBlock struct {
	off  int        // index of element (i·p, j·p) in the row-major n×n matrix
	diag bool       // i == j
	phi  [9]float64 // Φ/√(m_i m_j) (i > j) or S (i = j), p×p at stride p
	asym [9]float64 // A = (Φ − Φᵀ)/√(m_i m_i) for i = j, n ≠ 0
}

// dmCell is the group of blocks of one cell offset.
type dmCell struct {
	n      [3]int
	r      [3]float64 // Cartesian lattice vector R_n, Å
	lo, hi int        // blocks[lo:hi]
}

// buildBlocks packs m.terms into the lower-triangle blocks of D(q).
func (m *Model) buildBlocks() {
	p, nm := m.p, m.ModeCount()
	type acc struct {
		cell   [3]int
		blocks []dmBlock
	}
	index := map[[3]int]int{}
	var groups []acc
	group := func(n [3]int) *acc {
		g, ok := index[n]
		if !ok {
			g = len(groups)
			index[n] = g
			groups = append(groups, acc{cell: n})
		}
		return &groups[g]
	}
	for _, t := range m.terms {
		switch {
		case t.i > t.j:
			b := dmBlock{off: t.i*p*nm + t.j*p}
			for a := 0; a < p; a++ {
				for c := 0; c < p; c++ {
					b.phi[a*p+c] = t.phi[3*a+c]
				}
			}
			g := group(t.n)
			g.blocks = append(g.blocks, b)
		case t.i == t.j:
			if t.n != ([3]int{}) && !lessCell([3]int{}, t.n) {
				continue // n < 0: folded into the term of −n
			}
			b := dmBlock{off: t.i*p*nm + t.i*p, diag: true}
			zero := t.n == ([3]int{})
			for a := 0; a < p; a++ {
				for c := 0; c < p; c++ {
					if zero {
						b.phi[a*p+c] = t.phi[3*a+c]
					} else {
						b.phi[a*p+c] = t.phi[3*a+c] + t.phi[3*c+a]
						b.asym[a*p+c] = t.phi[3*a+c] - t.phi[3*c+a]
					}
				}
			}
			g := group(t.n)
			g.blocks = append(g.blocks, b)
		}
	}
	for _, g := range groups {
		lo := len(m.blocks)
		m.blocks = append(m.blocks, g.blocks...)
		m.cells = append(m.cells, dmCell{n: g.cell, r: m.latticeVec(g.cell), lo: lo, hi: len(m.blocks)})
		for k := 0; k < 3; k++ {
			m.reach[k] = max(m.reach[k], g.cell[k], -g.cell[k])
		}
	}
}

// phaseTable holds exp(2πi qₖ m) for m in [−reach_k, reach_k], per axis: the
// per-point state of the assembly, reused across points.
type phaseTable struct {
	pw [3][]complex128
	// gammaDir is the Cartesian direction from which Γ is approached when
	// q is a reciprocal lattice vector, for a long-range term (zero: its
	// analytic part only; longrange.go).
	gammaDir [3]float64
}

// fill computes the tables for q by repeated multiplication (the error
// after m steps is about m·ε, at most 64·ε here). Each qₖ is first reduced
// modulo 1 — exact in floating point, and D(q) is periodic with the
// reciprocal lattice — so the phase is as accurate at qₖ = 1e6 as near 0.
func (t *phaseTable) fill(q [3]float64, reach [3]int) {
	for k := 0; k < 3; k++ {
		r := reach[k]
		if cap(t.pw[k]) < 2*r+1 {
			t.pw[k] = make([]complex128, 2*r+1)
		}
		pw := t.pw[k][:2*r+1]
		t.pw[k] = pw
		pw[r] = 1
		if r == 0 {
			continue
		}
		s, c := math.Sincos(2 * math.Pi * (q[k] - math.Round(q[k])))
		w := complex(c, s)
		z := complex(1, 0)
		for j := 1; j <= r; j++ {
			z *= w
			pw[r+j] = z
			pw[r-j] = complex(real(z), -imag(z))
		}
	}
}

// phase returns exp(2πi q·n) from the filled tables.
func (t *phaseTable) phase(n [3]int, reach [3]int) complex128 {
	return t.pw[0][n[0]+reach[0]] * t.pw[1][n[1]+reach[1]] * t.pw[2][n[2]+reach[2]]
}

// assemble writes the lower triangle of D(q) into a (row-major, length
// Modes()²; the strict upper triangle is zeroed and left so). If stop is
// not nil it is polled every few thousand blocks and between row blocks of
// the clearing pass (37 MB at 512 sites), and assemble returns false
// (a unfinished) when it says so.
func (m *Model) assemble(q [3]float64, a []complex128, t *phaseTable, stop func() bool) bool {
	p, nm := m.p, m.ModeCount()
	if !clearPolled(a, nm, stop) {
		return false
	}
	t.fill(q, m.reach)
	done := 0
	for ci := range m.cells {
		cell := &m.cells[ci]
		if stop != nil {
			if done += cell.hi - cell.lo; done > 4096 {
				done = 0
				if stop() {
					return false
				}
			}
		}
		ph := t.phase(cell.n, m.reach)
		c, s := real(ph), imag(ph)
		blocks := m.blocks[cell.lo:cell.hi]
		switch p {
		case 3:
			for bi := range blocks {
				b := &blocks[bi]
				r0 := a[b.off : b.off+3]
				r1 := a[b.off+nm : b.off+nm+3]
				r2 := a[b.off+2*nm : b.off+2*nm+3]
				f := &b.phi
				if !b.diag {
					r0[0] += complex(f[0]*c, f[0]*s)
					r0[1] += complex(f[1]*c, f[1]*s)
					r0[2] += complex(f[2]*c, f[2]*s)
					r1[0] += complex(f[3]*c, f[3]*s)
					r1[1] += complex(f[4]*c, f[4]*s)
					r1[2] += complex(f[5]*c, f[5]*s)
					r2[0] += complex(f[6]*c, f[6]*s)
					r2[1] += complex(f[7]*c, f[7]*s)
					r2[2] += complex(f[8]*c, f[8]*s)
					continue
				}
				g := &b.asym
				r0[0] += complex(f[0]*c, 0)
				r1[0] += complex(f[3]*c, g[3]*s)
				r1[1] += complex(f[4]*c, 0)
				r2[0] += complex(f[6]*c, g[6]*s)
				r2[1] += complex(f[7]*c, g[7]*s)
				r2[2] += complex(f[8]*c, 0)
			}
		default:
			for bi := range blocks {
				b := &blocks[bi]
				for x := 0; x < p; x++ {
					row := a[b.off+x*nm : b.off+x*nm+p]
					if !b.diag {
						for y := range row {
							f := b.phi[x*p+y]
							row[y] += complex(f*c, f*s)
						}
						continue
					}
					for y := 0; y <= x; y++ {
						row[y] += complex(b.phi[x*p+y]*c, b.asym[x*p+y]*s)
					}
				}
			}
		}
	}
	return m.addLongRange(q, t.gammaDir, a, stop)
}

// assembleGrad writes the lower triangles of ∂D/∂q_α (α = x, y, z,
// Cartesian q in Å⁻¹; units eV/Å²/amu·Å) into g[α]: each term's phase
// e^{iq·R} brings down a factor iR_α. stop as for assemble.
func (m *Model) assembleGrad(q [3]float64, g *[3][]complex128, t *phaseTable, stop func() bool) bool {
	p, nm := m.p, m.ModeCount()
	for x := 0; x < 3; x++ {
		for r := 0; r < nm; r += eigen.PollRows + 1 {
			if stop != nil && stop() {
				return false
			}
			clear(g[x][r*nm : min(r+eigen.PollRows+1, nm)*nm])
		}
	}
	t.fill(q, m.reach)
	done := 0
	for ci := range m.cells {
		cell := &m.cells[ci]
		if cell.n == ([3]int{}) {
			continue // R = 0
		}
		if stop != nil {
			if done += cell.hi - cell.lo; done > 4096 {
				done = 0
				if stop() {
					return false
				}
			}
		}
		ph := t.phase(cell.n, m.reach)
		c, s := real(ph), imag(ph)
		for bi := cell.lo; bi < cell.hi; bi++ {
			b := &m.blocks[bi]
			for x := 0; x < p; x++ {
				for y := 0; y < p; y++ {
					var z complex128
					switch {
					case !b.diag:
						// d/dq of φ e^{iθ} = iR φ e^{iθ}.
						f := b.phi[x*p+y]
						z = complex(-f*s, f*c)
					case y <= x:
						// d/dq of S cos θ + iA sin θ = R(−S sin θ + iA cos θ).
						z = complex(-b.phi[x*p+y]*s, b.asym[x*p+y]*c)
					default:
						continue
					}
					k := b.off + x*nm + y
					for al := 0; al < 3; al++ {
						if r := cell.r[al]; r != 0 {
							g[al][k] += z * complex(r, 0)
						}
					}
				}
			}
		}
	}
	return m.longRange == nil || m.longRange.AddGradTo(q, g, stop)
}

// fillUpper completes a Hermitian matrix from its lower triangle.
func fillUpper(a []complex128, n int) {
	for i := 0; i < n; i++ {
		a[i*n+i] = complex(real(a[i*n+i]), 0)
		for j := 0; j < i; j++ {
			z := a[i*n+j]
			a[j*n+i] = complex(real(z), -imag(z))
		}
	}
}

// DynamicalMatrix writes D(q) for q in fractional reciprocal coordinates into
// out (row-major N×N, N = Modes(), eV/Å²/amu), allocating when out is too
// short, and returns it:
//
//	D_{iα,jβ}(q) = Σ_n Φ_αβ(0i; nj) exp(2πi q·n) / sqrt(m_i m_j).
//
// D is Hermitian by construction: the upper triangle is the conjugate of
// the lower one, which is the only part computed. A model's long-range
// term (longrange.go) is included, with its analytic part at Γ
// (ModesToward takes a direction there). q must be finite with |qₖ| ≤
// MaxQ; it panics otherwise (check user data with ValidateQPoints).
func (m *Model) DynamicalMatrix(q [3]float64, out []complex128) []complex128 {
	mustQ("DynamicalMatrix", q)
	nm := m.ModeCount()
	if cap(out) < nm*nm {
		out = make([]complex128, nm*nm)
	}
	out = out[:nm*nm]
	var t phaseTable
	m.assemble(q, out, &t, nil)
	fillUpper(out, nm)
	return out
}

// DynamicalMatrixGrad returns ∂D/∂q_α at q (fractional reciprocal
// coordinates) for the three Cartesian components α of q in Å⁻¹, each a
// full row-major N×N Hermitian matrix in eV/Å²/amu·Å: the analytic
// derivative Σ_n iR_{n,α} Φ(0i; nj) e^{iq·R_n}/sqrt(m_i m_j), with R_n the
// Cartesian lattice vector of cell n. Group velocities follow from it by
// the Hellmann–Feynman theorem (velocity.go). Precondition on q as for
// DynamicalMatrix.
func (m *Model) DynamicalMatrixGrad(q [3]float64) [3][]complex128 {
	mustQ("DynamicalMatrixGrad", q)
	nm := m.ModeCount()
	var g [3][]complex128
	for x := range g {
		g[x] = make([]complex128, nm*nm)
	}
	var t phaseTable
	m.assembleGrad(q, &g, &t, nil)
	for x := range g {
		fillUpper(g[x], nm)
	}
	return g
}
