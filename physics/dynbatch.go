// Batched assembly of the dynamical matrix: for models with many cell
// offsets (folded supercell force constants have hundreds per pair), D(q)
// of a batch of q-points as two real matrix products instead of a loop
// per cell, block and element for each q.
//
// Every element e of the lower triangle of D(q) is, by dmBlock,
//
//	D_e(q) = Σ_c Re_ce cos θ_c + i Σ_c Im_ce sin θ_c,  θ_c = 2π q·n_c,
//
// with Re = Φ/√(m_i m_j) (blocks i > j) or S, Im = the same Φ or A (blocks
// i = i). Stacking Re and Im as cells × elements matrices (the stack),
// and cos θ, sin θ of a batch of Q points as Q × cells matrices, the
// batch's matrices are Cos·Re and Sin·Im (gonum's Dgemm). The products add
// the cells in the same order as the loop does, so on this build the two
// agree to the last bit; they are tested to agree to 1e-13 relative.
//
// The batched path is taken only where it is faster: a model's stack is
// built at compile time when the measured costs say so (useStack), else
// the model keeps assembling each q alone (and holds no stack).

package physics

import (
	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"

	"github.com/materials-lab/modegrid/physics/eigen"
)

// dmStack is the force constants stacked by cell for the batched assembly.
type dmStack struct {
	cols int       // M: the lower-triangle elements some block reaches
	pos  []int     // pos[e]: the index of element e in the row-major n×n matrix
	re   []float64 // cells × M, row-major: coefficients of cos θ_c
	im   []float64 // cells × M: coefficients of sin θ_c
	// narrow: the products are taken transposed, M × Q = Reᵀ·Cosᵀ, which is
	// faster when M is small (long rows of Q instead of short rows of M).
	narrow bool
	batch  int // q-points per batch
}

// Measured costs that choose the path (useStack), on the project's 2-core
// machine, one core, gonum v0.17's pure-Go Dgemm (TestAssemblyTable, CPU
// time; DEVELOPERS.md): the loop of assemble spends about stackLoopNs per
// block element and point (0.64–0.95 measured, more for larger matrices);
// the products about stackGemmNs per entry of the stack (cells × M) and
// point (0.42–0.70), stackNarrowNs when M is small and the products run
// along the batch's points (0.24–0.35), plus a nanosecond per element
// scattered into the matrix; both compute the phases, stackPhaseNs per
// cell and point (4–5).
const (
	stackLoopNs   = 0.7
	stackGemmNs   = 0.5
	stackNarrowNs = 0.3
	stackPhaseNs  = 4.5
	// stackMinGain is how much faster the products must be estimated to
	// be before a model takes them (and holds the stack).
	stackMinGain = 1.2
	// stackMinElements: below this many block elements per point the loop
	// costs about a microsecond and the choice does not matter.
	stackMinElements = 1024
	// stackNarrowCols is the M below which the products are taken
	// transposed (long rows of the batch's points instead of short rows
	// of M).
	stackNarrowCols = 64
	// stackBatchBytes bounds one batch's phases and products.
	stackBatchBytes = 2 << 20
	// stackMaxBatch bounds the points of a batch.
	stackMaxBatch = 64
)

// blockElements is the number of elements of D the blocks of m add to per
// point (p² for a block i > j, p(p+1)/2 for a block i = i), and the number
// of distinct lower-triangle elements they reach.
func (m *Model) blockElements() (elems int, index map[int]int, pos []int) {
	p, nm := m.p, m.ModeCount()
	index = map[int]int{}
	for bi := range m.blocks {
		b := &m.blocks[bi]
		for a := 0; a < p; a++ {
			for c := 0; c < p; c++ {
				if b.diag && c > a {
					continue
				}
				elems++
				x := b.off + a*nm + c
				if _, ok := index[x]; !ok {
					index[x] = len(pos)
					pos = append(pos, x)
				}
			}
		}
	}
	return elems, index, pos
}

// useStack reports whether the batched assembly is estimated faster than
// the loop for a model whose blocks add elems elements to cols distinct
// lower-triangle elements over cells cells (the constants above).
func useStack(elems, cells, cols int) bool {
	if elems < stackMinElements {
		return false
	}
	perEntry := stackGemmNs
	if cols < stackNarrowCols {
		perEntry = stackNarrowNs
	}
	phases := stackPhaseNs * float64(cells)
	loop := stackLoopNs*float64(elems) + phases
	gemm := perEntry*float64(cells)*float64(cols) + float64(cols) + phases
	return loop >= stackMinGain*gemm
}

// buildStack stacks m.blocks by cell when useStack says so or force is
// set (m.stack stays nil otherwise).
func (m *Model) buildStack(force bool) {
	elems, index, pos := m.blockElements()
	cells, cols := len(m.cells), len(pos)
	if !force && !useStack(elems, cells, cols) {
		return
	}
	p, nm := m.p, m.ModeCount()
	st := &dmStack{cols: cols, pos: pos, re: make([]float64, cells*cols), im: make([]float64, cells*cols)}
	for ci, cell := range m.cells {
		row := ci * cols
		for bi := cell.lo; bi < cell.hi; bi++ {
			b := &m.blocks[bi]
			for a := 0; a < p; a++ {
				for c := 0; c < p; c++ {
					if b.diag && c > a {
						continue
					}
					e := row + index[b.off+a*nm+c]
					st.re[e] = b.phi[a*p+c]
					if b.diag {
						st.im[e] = b.asym[a*p+c]
					} else {
						st.im[e] = b.phi[a*p+c]
					}
				}
			}
		}
	}
	st.narrow = cols < stackNarrowCols
	st.batch = max(1, min(stackMaxBatch, stackBatchBytes/(16*(cells+cols))))
	m.stack = st
}

// StackBytes is the memory of the model's stacked force constants (0 when
// it assembles each q alone): for accounting the compiled model.
func (m *Model) StackBytes() int64 {
	if m.stack == nil {
		return 0
	}
	return int64(16*len(m.stack.re) + 8*len(m.stack.pos))
}

// batchPoints is the number of q-points a mode loop should hand to one
// worker at a time: the stack's batch, or 16 for a model without one.
func (m *Model) batchPoints() int {
	if m.stack == nil {
		return 16
	}
	return m.stack.batch
}

// batchPointBytes is the memory of a worker's batch buffers (batchWork)
// per point of its largest batch, 0 for a model without a stack: the
// phases (cells) and products (M), real and imaginary, and the point
// (twice: the loop's list and the batch's).
func (m *Model) batchPointBytes() int64 {
	if m.stack == nil {
		return 0
	}
	return int64(16*(len(m.cells)+m.stack.cols) + 48)
}

// batchFixedBytes is the rest of a worker's batch workspace, 0 for a
// model without a stack: the structure, its own phase tables, and up to a
// page (8 KiB) of rounding for each of its four large buffers (the
// runtime gives a large object whole pages).
func (m *Model) batchFixedBytes() int64 {
	if m.stack == nil {
		return 0
	}
	return int64(512 + 48*(2*max(m.reach[0], m.reach[1], m.reach[2])+1) + 4*8192)
}

// batchWork is one worker's batch: its points and the products, reused
// from batch to batch.
type batchWork struct {
	m      *Model
	q      [][3]float64 // the batch's points, in order
	cs, sn []float64    // cos θ and sin θ: Q × cells (cells × Q when narrow)
	re, im []float64    // the products: Q × M (M × Q when narrow)
	t      phaseTable
}

// newBatchWork returns a batch workspace for m, nil when m has no stack.
// Its buffers grow to the largest batch it is given (reserve sets them up
// front).
func (m *Model) newBatchWork() *batchWork {
	if m.stack == nil {
		return nil
	}
	return &batchWork{m: m}
}

// reserve allocates the buffers for batches of up to n points.
func (b *batchWork) reserve(n int) {
	nc, mc := len(b.m.cells), b.m.stack.cols
	if cap(b.q) < n {
		b.q = make([][3]float64, 0, n)
		b.cs, b.sn = make([]float64, n*nc), make([]float64, n*nc)
		b.re, b.im = make([]float64, n*mc), make([]float64, n*mc)
	}
}

// compute builds D(q) of the points qs (at most the stack's batch) as the
// two products. It polls stop (when not nil) before the products and
// returns false, leaving no batch, when it says so.
func (b *batchWork) compute(qs [][3]float64, stop func() bool) bool {
	m, st := b.m, b.m.stack
	b.q = b.q[:0]
	nq, nc, mc := len(qs), len(m.cells), st.cols
	b.reserve(nq)
	for qi, q := range qs {
		b.t.fill(q, m.reach)
		for ci := range m.cells {
			ph := b.t.phase(m.cells[ci].n, m.reach)
			x := qi*nc + ci
			if st.narrow {
				x = ci*nq + qi
			}
			b.cs[x], b.sn[x] = real(ph), imag(ph)
		}
	}
	if stop != nil && stop() {
		return false
	}
	if st.narrow {
		reT := blas64.General{Rows: nc, Cols: mc, Stride: mc, Data: st.re}
		imT := blas64.General{Rows: nc, Cols: mc, Stride: mc, Data: st.im}
		blas64.Gemm(blas.Trans, blas.NoTrans, 1, reT, blas64.General{Rows: nc, Cols: nq, Stride: nq, Data: b.cs}, 0, blas64.General{Rows: mc, Cols: nq, Stride: nq, Data: b.re})
		blas64.Gemm(blas.Trans, blas.NoTrans, 1, imT, blas64.General{Rows: nc, Cols: nq, Stride: nq, Data: b.sn}, 0, blas64.General{Rows: mc, Cols: nq, Stride: nq, Data: b.im})
	} else {
		re := blas64.General{Rows: nc, Cols: mc, Stride: mc, Data: st.re}
		im := blas64.General{Rows: nc, Cols: mc, Stride: mc, Data: st.im}
		blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, blas64.General{Rows: nq, Cols: nc, Stride: nc, Data: b.cs}, re, 0, blas64.General{Rows: nq, Cols: mc, Stride: mc, Data: b.re})
		blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, blas64.General{Rows: nq, Cols: nc, Stride: nc, Data: b.sn}, im, 0, blas64.General{Rows: nq, Cols: mc, Stride: mc, Data: b.im})
	}
	b.q = append(b.q, qs...)
	return true
}

// load writes the lower triangle of D of the batch's point k into a
// (row-major, Modes()²; the strict upper triangle zeroed), as assemble
// does, polling stop (when not nil) as assemble does while clearing.
func (b *batchWork) load(k int, a []complex128, stop func() bool) bool {
	st, nm := b.m.stack, b.m.ModeCount()
	if !clearPolled(a, nm, stop) {
		return false
	}
	nq := len(b.q)
	if st.narrow {
		for e, x := range st.pos {
			a[x] = complex(b.re[e*nq+k], b.im[e*nq+k])
		}
		return true
	}
	re, im := b.re[k*st.cols:(k+1)*st.cols], b.im[k*st.cols:(k+1)*st.cols]
	for e, x := range st.pos {
		a[x] = complex(re[e], im[e])
	}
	return true
}

// clearPolled zeroes the n×n matrix a, polling stop (when not nil)
// between row blocks (37 MB at 512 sites); false when stop said so.
func clearPolled(a []complex128, n int, stop func() bool) bool {
	if stop == nil {
		clear(a)
		return true
	}
	for r := 0; r < n; r += eigen.PollRows + 1 {
		if stop() {
			return false
		}
		clear(a[r*n : min(r+eigen.PollRows+1, n)*n])
	}
	return true
}
