// Internals exposed to the core's tests (package physics_test), which
// cannot reach them otherwise (the Go convention: this file is in package
// physics and compiled only with the tests).

package physics

import (
	"context"

	"github.com/materials-lab/modegrid/physics/lattice"
)

// Internals of the engine.
var (
	CellMeasure        = cellMeasure
	AcousticSpeedsATHz = acousticSpeedsATHz
	CleanEigenvalues   = cleanEigenvalues
	Transpose9         = transpose9
	SiteSeparation     = siteSeparation
	LessCell           = lessCell
	Neg3               = neg3
)

// DlamchE is the unit roundoff the engine's error bounds use.
const DlamchE = dlamchE

// Term is one compiled mass-weighted force-constant block Φ(0I; N J).
type Term struct {
	I, J int
	N    [3]int
	Phi  [9]float64
}

// Terms returns the compiled terms of m, in their stored order.
func (m *Model) Terms() []Term {
	out := make([]Term, len(m.terms))
	for k, t := range m.terms {
		out[k] = Term{I: t.i, J: t.j, N: t.n, Phi: t.phi}
	}
	return out
}

// ShellBond is one bond of a shell: From, To, the cell N of To, and the
// bond vector R (Å).
type ShellBond struct {
	From, To int
	N        [3]int
	R        [3]float64
}

// ShellBonds returns the bonds of shell sh in m under the default limits.
func (m *Model) ShellBonds(ctx context.Context, sh Shell) ([]ShellBond, error) {
	bonds, _, err := m.findShell(ctx, sh, Limits{}.WithDefaults())
	out := make([]ShellBond, len(bonds))
	for k, b := range bonds {
		r := lattice.Sub(lattice.Add(m.pos[b.j], m.latticeVec(b.n)), m.pos[b.i])
		out[k] = ShellBond{From: b.i, To: b.j, N: b.n, R: r}
	}
	return out, err
}

// CartQ is q (reduced coordinates) in Cartesian 1/Å.
func (m *Model) CartQ(q [3]float64) [3]float64 { return m.cartQ(q) }

// ChunkPoints is the number of q-points per streamed chunk.
func (m *Model) ChunkPoints(opt ModeOptions) int { return m.chunkPoints(opt) }

// SetTestHookChunkDone sets (nil: clears) the hook called as each
// streamed chunk is done.
func SetTestHookChunkDone(f func(c int)) { testHookChunkDone = f }

// PhaseTable is the workspace of Assemble.
type PhaseTable = phaseTable

// Assemble writes D(q) into a.
func (m *Model) Assemble(q [3]float64, a []complex128, t *PhaseTable) { m.assemble(q, a, t, nil) }

// PointWork is the per-worker workspace of the modes at one q.
type PointWork = pointWork

// NewPointWork returns a workspace for m.
func (m *Model) NewPointWork() *PointWork { return m.newPointWork(nil) }

// Point computes the modes at pm.Q into pm.
func (w *pointWork) Point(pm *PointModes, opt ModeOptions) bool { return w.point(pm, opt) }

// Lazy is the engine's once-per-model value.
type Lazy[T any] = lazy[T]

// Get is lazy.get.
func (l *lazy[T]) Get(ctx context.Context, compute func(context.Context) (T, error)) (T, error) {
	return l.get(ctx, compute)
}

// SamePhysics reports whether two compiled models are bit for bit the same
// in everything a result depends on: lattice, site masses and positions,
// and the p×p parts of the mass-weighted force constants. Where they are,
// every result is the same and the hash need not change.
func SamePhysics(a, b *Model) bool {
	if a.dim != b.dim || a.p != b.p || a.nsites != b.nsites || a.lattice != b.lattice || len(a.terms) != len(b.terms) {
		return false
	}
	for i := range a.pos {
		if a.pos[i] != b.pos[i] || a.massAmu[i] != b.massAmu[i] {
			return false
		}
		for k := range a.frac[i] {
			if a.frac[i][k] != b.frac[i][k] {
				return false
			}
		}
	}
	for n := range a.terms {
		s, u := a.terms[n], b.terms[n]
		if s.i != u.i || s.j != u.j || s.n != u.n {
			return false
		}
		for x := 0; x < a.p; x++ {
			for y := 0; y < a.p; y++ {
				if s.phi[3*x+y] != u.phi[3*x+y] {
					return false
				}
			}
		}
	}
	return true
}

// HasStack reports whether m assembles D(q) in batches (dynbatch.go).
func (m *Model) HasStack() bool { return m.stack != nil }

// SetStack gives m a stack (on) or takes it away (off), whatever the
// crossover says: for comparing the two assemblies on one model. Only
// for a model no other goroutine uses.
func (m *Model) SetStack(on bool) {
	m.stack = nil
	if on {
		m.buildStack(true)
	}
}

// BatchedDynamicalMatrices returns the full Hermitian D(q) of each of qs
// by the batched assembly (the model must have a stack), in batches of
// at most the stack's batch.
func (m *Model) BatchedDynamicalMatrices(qs [][3]float64) [][]complex128 {
	b := m.newBatchWork()
	nm := m.ModeCount()
	var out [][]complex128
	for lo := 0; lo < len(qs); lo += m.stack.batch {
		part := qs[lo:min(lo+m.stack.batch, len(qs))]
		b.compute(part, nil)
		for k := range part {
			a := make([]complex128, nm*nm)
			b.load(k, a, nil)
			fillUpper(a, nm)
			out = append(out, a)
		}
	}
	return out
}

// BatchPoints is the number of points a mode loop hands a worker at once.
func (m *Model) BatchPoints() int { return m.batchPoints() }

// BatchAssemble builds D(q) of every q of qs by the batched assembly, each
// into a (lower triangle, as Assemble): the batched twin of Assemble for
// the benchmarks. The model must have a stack.
func (m *Model) BatchAssemble(qs [][3]float64, a []complex128) {
	b := m.newBatchWork()
	for lo := 0; lo < len(qs); lo += m.stack.batch {
		part := qs[lo:min(lo+m.stack.batch, len(qs))]
		b.compute(part, nil)
		for k := range part {
			b.load(k, a, nil)
		}
	}
}

// Cells is the number of cell offsets of m's dynamical matrix.
func (m *Model) Cells() int { return len(m.cells) }
