// Normal modes at single q-points and streamed over q-point lists.

package physics

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"sync/atomic"

	"github.com/materials-lab/modegrid/physics/eigen"
	"github.com/materials-lab/modegrid/physics/mesh"

	"github.com/materials-lab/modegrid/physics/internal/parallel"
)

// MaxQ bounds every component of a wavevector the engine accepts, in
// fractional reciprocal coordinates (reciprocal-lattice units): |qₖ| ≤ 1e6.
// D(q) is periodic in q, so larger components say nothing new; the phases
// are computed from qₖ reduced modulo 1 (exact in floating point), so the
// bound costs no accuracy, and it keeps Cartesian wavevectors, path lengths
// and distances far from overflow.
const MaxQ = 1e6

// checkQ reports whether every component of q is finite and within ±MaxQ.
func checkQ(q [3]float64) bool {
	for _, x := range q {
		if !(math.Abs(x) <= MaxQ) { // false for NaN
			return false
		}
	}
	return true
}

// mustQ panics (a programmer error, as gonum does) when q is out of the
// engine's domain: the single-point methods document the precondition;
// data from users goes through ValidateQPoints or the list and path
// methods, which return errors instead.
func mustQ(fn string, q [3]float64) {
	if !checkQ(q) {
		panic(fmt.Sprintf("physics: %s: q = %v is not finite or exceeds MaxQ = %g (check with ValidateQPoints)", fn, q, MaxQ))
	}
}

// eigenTolFactor is the constant c of the eigenvalue tolerance
// c·(n + cells)·ε·‖D‖ (EigenTol).
const eigenTolFactor = 4

// EigenTol is the eigenvalue tolerance of the model (eV/Å²/amu): an
// eigenvalue of D(q) with |λ| ≤ EigenTol cannot be told from zero. It is
// c·(n + C)·ε·Λ with n = Modes(), C the number of cell offsets that
// contribute to D, ε = 2⁻⁵² and Λ the Gershgorin bound on ‖D(q)‖ at every q
// (largest row sum of |Φ|/√(m_i m_j)), c = 4: the backward error of the
// Householder reduction and QL, n·ε‖D‖ up to a modest constant (Golub &
// Van Loan, Matrix Computations, 4th ed., §8.3.1 and §8.3.5; Parlett, The
// Symmetric Eigenvalue Problem, §8.15), plus the rounding of D itself,
// summed over C cells with the sum-rule self terms (C·ε·Λ), plus the same
// allowance for a long-range term (c·terms·ε·scale, longrange.go). See
// doc.go, Zero and imaginary modes.
func (m *Model) EigenTol() float64 {
	return eigenTolFactor*float64(m.ModeCount()+len(m.cells))*eigen.Epsilon*m.lambdaScale + m.longRangeTol()
}

// EigenTolTHz is EigenTol as a frequency (THz): a mode with |ν| up to
// this is zero to the solver's accuracy.
func (m *Model) EigenTolTHz() float64 { return eigToTHz(m.EigenTol()) }

// cleanEigenvalues applies the zero rule of doc.go to eigenvalues vals
// (ascending) of D(q): at a reciprocal lattice vector the p eigenvalues of
// smallest |λ| that are within tol are set to 0 (the acoustic modes at Γ);
// anywhere, a negative eigenvalue within tol is set to 0. Values stay
// ascending and keep their index (eigenvectors stay attached).
func cleanEigenvalues(vals []float64, q [3]float64, p int, tol float64) {
	if IsGamma(q) {
		for n := 0; n < p; n++ {
			best := -1
			for k, v := range vals {
				if v != 0 && math.Abs(v) <= tol && (best < 0 || math.Abs(v) < math.Abs(vals[best])) {
					best = k
				}
			}
			if best < 0 {
				break
			}
			vals[best] = 0
		}
	}
	for k, v := range vals {
		if v < 0 && v >= -tol {
			vals[k] = 0
		}
	}
}

// DefaultChunkBytes bounds the memory of one streamed chunk when
// ModeOptions.ChunkSize is 0: 4 MiB, so that a stream holds only a few
// such chunks at once whatever the grid size.
const DefaultChunkBytes = 4 << 20

// DefaultChunkPoints is the largest default chunk, in points.
const DefaultChunkPoints = 1024

// ModeOptions selects what StreamModes computes beyond frequencies.
type ModeOptions struct {
	Eigenvectors bool // normalised eigenvectors of D(q)
	Velocities   bool // group velocities, km/s
	// ChunkSize is the number of points per emitted chunk; 0 chooses one
	// from DefaultChunkBytes.
	ChunkSize int
	// VelocityDir (Cartesian, any length) is the direction used to split
	// degenerate modes for their group velocities: inside a degenerate
	// subspace the modes returned are the eigenvectors of VelocityDir·∂D/∂q
	// (first-order degenerate perturbation theory along that direction).
	// Zero means a fixed generic direction. See velocity.go.
	VelocityDir [3]float64
	// GammaDirs, when not nil, holds one Cartesian direction per point of a
	// StreamModes list: at a point that is a reciprocal lattice vector, the
	// direction from which q approaches it, for a model with a long-range
	// term (LO–TO splitting); a zero direction takes the term's analytic
	// part only, as every grid does. Ignored at other points, for other
	// models, and by Point.
	GammaDirs [][3]float64
}

// PointModes holds the modes at one q-point.
type PointModes struct {
	Q      [3]float64 // fractional reciprocal coordinates
	Weight float64
	// FreqTHz are the frequencies, ascending, THz; imaginary modes are
	// negative, and modes zero within the solver's accuracy are exactly 0
	// (see doc.go, Zero and imaginary modes).
	FreqTHz []float64
	// Imaginary is true when any mode is negative: a real instability.
	Imaginary bool
	// Eigvecs are the normalised eigenvectors of D(q), mode-major:
	// Eigvecs[k*n+c] is component c = site·p + axis of mode k (phase
	// convention of doc.go). Nil unless asked.
	Eigvecs []complex128
	// VelKmS[k] is the group velocity ∂ω/∂q of mode k, Cartesian, km/s.
	// Nil unless asked.
	VelKmS [][3]float64
}

// ModeChunk is a run of consecutive points of a StreamModes call; Offset
// is the index of Points[0] in the caller's list.
type ModeChunk struct {
	Offset int
	Points []PointModes
}

// imaginary reports a frequency list with a negative mode (rounding noise
// has been set to 0 by cleanEigenvalues).
func imaginary(freqTHz []float64) bool {
	for _, f := range freqTHz {
		if f < 0 {
			return true
		}
	}
	return false
}

// pointWork is one worker's reusable state for the modes at one q-point:
// nothing is allocated per point once it is warm.
type pointWork struct {
	m     *Model
	eig   *eigen.Work
	ph    phaseTable
	vel   *velWork     // lazily, for group velocities
	batch *batchWork   // the points prefetched (nil: the model assembles each q alone)
	next  int          // the batch's point the next solve expects
	qbuf  [][3]float64 // the points of the next batch, as the loops gather them
	done  <-chan struct{}
}

func (m *Model) newPointWork(done <-chan struct{}) *pointWork {
	w := &pointWork{m: m, eig: eigen.NewWork(m.ModeCount()), batch: m.newBatchWork(), done: done}
	w.eig.SetStop(done)
	return w
}

// reserve sets up the batch buffers for batches of up to n points (no-op
// for a model without a stack), so that a worker's memory is known when
// it starts: what the cost estimates count.
func (w *pointWork) reserve(n int) {
	if w.batch == nil {
		return
	}
	n = min(n, w.m.stack.batch)
	w.qbuf = make([][3]float64, 0, n)
	w.batch.reserve(n)
}

// prefetch builds D(q) for the points qs (at most Model.batchPoints of
// them) that the worker will solve next, in this order, as one batch
// (dynbatch.go); a model without a stack builds nothing here and
// assembles each point when it is solved. It returns false if stopped.
func (w *pointWork) prefetch(qs [][3]float64) bool {
	if w.batch == nil {
		return true
	}
	w.next = 0
	return w.batch.compute(qs, w.stopFunc())
}

// stopFunc is the poll the assembly loops take: nil (never stop) for
// matrices too small to be worth polling inside, as the solver does.
func (w *pointWork) stopFunc() func() bool {
	if w.done != nil && w.m.ModeCount() >= eigen.CancelCheckModes {
		return w.stopped
	}
	return nil
}

// dynamical writes the lower triangle of D(q) into the solver's matrix:
// from the prefetched batch when q is its next point, else assembled on
// its own. Every D(q) that the mode loops diagonalise is completed here —
// the one place to add a term beyond the force constants' own. It
// returns false if stopped.
func (w *pointWork) dynamical(q [3]float64) bool {
	stop := w.stopFunc()
	if b := w.batch; b != nil && w.next < len(b.q) && b.q[w.next] == q {
		w.next++
		if !b.load(w.next-1, w.eig.A(), stop) {
			return false
		}
		// The batch holds the force constants' part only, as assemble
		// before its last step: the long-range term is added here.
		return w.m.addLongRange(q, w.ph.gammaDir, w.eig.A(), stop)
	}
	return w.m.assemble(q, w.eig.A(), &w.ph, stop)
}

// solve diagonalises D(q) into w.eig.Values() (eigenvalues, eV/Å²/amu,
// ascending, rounding noise around zero set to 0 by cleanEigenvalues) and,
// with vectors, w.eig.Vectors(). It returns false if stopped.
func (w *pointWork) solve(q [3]float64, vectors bool) bool {
	if !w.dynamical(q) {
		return false
	}
	switch w.eig.Solve(vectors) {
	case eigen.Stopped:
		return false
	case eigen.NoConverge:
		// Never seen on finite input; the real embedding is the
		// slower, independent second opinion.
		vals, vecs := eigen.Embedded(w.m.DynamicalMatrix(q, nil), w.m.ModeCount(), vectors)
		copy(w.eig.Values(), vals)
		if vectors {
			copy(w.eig.Vectors(), vecs)
		}
	}
	cleanEigenvalues(w.eig.Values(), q, w.m.p, w.m.EigenTol())
	return true
}

// freqs converts the eigenvalues of the last solve to THz into out.
func (w *pointWork) freqs(out []float64) {
	for k, v := range w.eig.Values() {
		out[k] = eigToTHz(v)
	}
}

// FrequenciesTHz returns the mode frequencies at q (fractional reciprocal
// coordinates) in THz, ascending; imaginary modes are negative, zero modes
// exactly 0. q must be finite with |qₖ| ≤ MaxQ (it panics otherwise: check
// user data with ValidateQPoints).
func (m *Model) FrequenciesTHz(q [3]float64) []float64 {
	mustQ("FrequenciesTHz", q)
	w := m.newPointWork(nil)
	w.solve(q, false)
	out := make([]float64, m.ModeCount())
	w.freqs(out)
	return out
}

// ModesAt returns the frequencies at q (THz, ascending) and the normalised
// eigenvectors of D(q), mode-major (vecs[k*n+c], c = site·p + axis).
// Precondition on q as for FrequenciesTHz.
func (m *Model) ModesAt(q [3]float64) ([]float64, []complex128) {
	mustQ("ModesAt", q)
	w := m.newPointWork(nil)
	w.solve(q, true)
	out := make([]float64, m.ModeCount())
	w.freqs(out)
	return out, w.eig.Vectors()
}

// Point returns the modes at one q-point with the options' extras
// (ChunkSize is ignored). Preconditions as for FrequenciesTHz, and
// opt.VelocityDir finite (it panics otherwise; StreamModes returns errors).
func (m *Model) Point(q [3]float64, opt ModeOptions) PointModes {
	mustQ("Point", q)
	if !finite3(opt.VelocityDir) {
		panic(fmt.Sprintf("physics: Point: VelocityDir %v is not finite", opt.VelocityDir))
	}
	w := m.newPointWork(nil)
	n := m.ModeCount()
	pm := PointModes{Q: q, Weight: 1, FreqTHz: make([]float64, n)}
	if opt.Eigenvectors {
		pm.Eigvecs = make([]complex128, n*n)
	}
	if opt.Velocities {
		pm.VelKmS = make([][3]float64, n)
	}
	w.point(&pm, opt)
	return pm
}

// point fills pm (whose slices are allocated to size) at pm.Q; it returns
// false if stopped.
func (w *pointWork) point(pm *PointModes, opt ModeOptions) bool {
	vectors := opt.Eigenvectors || opt.Velocities
	if !w.solve(pm.Q, vectors) {
		return false
	}
	if opt.Velocities {
		if w.vel == nil {
			w.vel = newVelWork(w.m)
		}
		if !w.vel.velocities(w, pm.Q, opt.VelocityDir, pm.VelKmS) {
			return false
		}
	}
	w.freqs(pm.FreqTHz)
	pm.Imaginary = imaginary(pm.FreqTHz)
	if opt.Eigenvectors {
		n := w.m.ModeCount()
		for r := 0; r < n; r += eigen.PollRows + 1 { // 37 MB at 512 sites
			if n >= eigen.CancelCheckModes && w.stopped() {
				return false
			}
			hi := min(r+eigen.PollRows+1, n) * n
			copy(pm.Eigvecs[r*n:hi], w.eig.Vectors()[r*n:hi])
		}
	}
	return true
}

// chunkPoints is the chunk size StreamModes uses for opt.
func (m *Model) chunkPoints(opt ModeOptions) int {
	if opt.ChunkSize > 0 {
		return opt.ChunkSize
	}
	n := m.ModeCount()
	per := 8*n + 64 // frequencies and the point record
	if opt.Eigenvectors {
		per += 16 * n * n
	}
	if opt.Velocities {
		per += 24 * n
	}
	return max(1, min(DefaultChunkPoints, DefaultChunkBytes/per))
}

// StreamModes computes the modes at every point of pts on all cores and
// calls emit with consecutive chunks of at most ChunkSize points, in q
// order, from the calling goroutine. At most a few chunks exist at once
// (two per core), so memory stays bounded on any number of points even with
// eigenvectors. A chunk and its slices belong to emit once passed.
//
// It stops promptly when ctx is done (workers poll it between points and,
// for large matrices, inside the eigensolver) and returns ctx.Err(); an
// error from emit stops the work and is returned as is. Points are checked
// first with ValidateQPoints (fields "points[i].q1" …), and
// opt.VelocityDir must be finite (field "velocity_dir").
func (m *Model) StreamModes(ctx context.Context, pts []mesh.QPoint, opt ModeOptions, emit func(ModeChunk) error) error {
	if err := ValidateQPoints(m.dim, pts, "points"); err != nil {
		return err
	}
	if err := checkModeOptions(opt, len(pts)); err != nil {
		return err
	}
	if emit == nil {
		return errors.New("physics: StreamModes needs an emit function")
	}
	if len(pts) == 0 {
		return ctx.Err()
	}
	chunk := m.chunkPoints(opt)
	nchunks := (len(pts) + chunk - 1) / chunk
	workers := min(runtime.GOMAXPROCS(0), nchunks)
	window := 2 * workers

	g, ctx := parallel.NewGroup(ctx) // a worker's panic cancels ctx; g.Wait re-raises it
	defer g.Stop()
	slots := make([]chan ModeChunk, window)
	for k := range slots {
		slots[k] = make(chan ModeChunk, 1)
	}
	tokens := make(chan struct{}, window)
	for k := 0; k < window; k++ {
		tokens <- struct{}{}
	}
	var next atomic.Int64
	n := m.ModeCount()
	for wk := 0; wk < workers; wk++ {
		g.Go(func() {
			w := m.newPointWork(ctx.Done())
			w.reserve(chunk)
			for {
				select {
				case <-tokens:
				case <-ctx.Done():
					return
				}
				c := int(next.Add(1) - 1)
				if c >= nchunks {
					return
				}
				lo, hi := c*chunk, min((c+1)*chunk, len(pts))
				mc, ok := w.chunk(pts[lo:hi], lo, n, opt)
				if !ok {
					return
				}
				if testHookChunkDone != nil {
					testHookChunkDone(c)
				}
				slots[c%window] <- mc
			}
		})
	}
	var err error
	for c := 0; c < nchunks && err == nil; c++ {
		select {
		case mc := <-slots[c%window]:
			if e := emit(mc); e != nil {
				err = e
			}
			tokens <- struct{}{}
		case <-ctx.Done():
			err = ctx.Err()
		}
	}
	g.Stop()
	g.Wait()
	return err
}

// testHookChunkDone, when set by a test, is called from the worker that
// finished chunk c, before the chunk is handed to the emitter.
var testHookChunkDone func(c int)

// chunk computes one chunk; false if stopped.
func (w *pointWork) chunk(pts []mesh.QPoint, offset, n int, opt ModeOptions) (ModeChunk, bool) {
	if w.stopped() {
		return ModeChunk{}, false
	}
	mc := ModeChunk{Offset: offset, Points: make([]PointModes, len(pts))}
	freq := make([]float64, len(pts)*n)
	var vecs []complex128
	if opt.Eigenvectors {
		vecs = make([]complex128, len(pts)*n*n)
	}
	var vel [][3]float64
	if opt.Velocities {
		vel = make([][3]float64, len(pts)*n)
	}
	batch := w.m.batchPoints()
	for i, p := range pts {
		if w.stopped() {
			return mc, false
		}
		if w.batch != nil && i%batch == 0 {
			w.qbuf = w.qbuf[:0]
			for _, p := range pts[i:min(i+batch, len(pts))] {
				w.qbuf = append(w.qbuf, p.Q)
			}
			if !w.prefetch(w.qbuf) {
				return mc, false
			}
		}
		pm := &mc.Points[i]
		pm.Q, pm.Weight = p.Q, p.Weight
		w.ph.gammaDir = [3]float64{}
		if opt.GammaDirs != nil {
			w.ph.gammaDir = opt.GammaDirs[offset+i]
		}
		pm.FreqTHz = freq[i*n : (i+1)*n : (i+1)*n]
		if vecs != nil {
			pm.Eigvecs = vecs[i*n*n : (i+1)*n*n : (i+1)*n*n]
		}
		if vel != nil {
			pm.VelKmS = vel[i*n : (i+1)*n : (i+1)*n]
		}
		if !w.point(pm, opt) {
			return mc, false
		}
	}
	return mc, true
}

func (w *pointWork) stopped() bool {
	if w.done == nil {
		return false
	}
	select {
	case <-w.done:
		return true
	default:
		return false
	}
}

// ValidateQPoints checks explicit q-points for a d-dimensional crystal:
// every component finite and within ±MaxQ, the components past d zero, the
// weight finite. Violations name fields prefix[i].q1 … q3.
func ValidateQPoints(dim int, pts []mesh.QPoint, prefix string) error {
	var vs Violations
	for i, p := range pts {
		for k, x := range p.Q {
			switch {
			case !(math.Abs(x) <= MaxQ):
				vs.Add(fmt.Sprintf("%s[%d].q%d", prefix, i, k+1), qRangeMsg, x)
			case k >= dim && x != 0:
				vs.Add(fmt.Sprintf("%s[%d].q%d", prefix, i, k+1), "must be 0 for a %d-dimensional crystal, got %v", dim, x)
			}
		}
		if !finite(p.Weight) {
			vs.Add(fmt.Sprintf("%s[%d].weight", prefix, i), "must be finite, got %v", p.Weight)
		}
	}
	return vs.Err()
}

// qRangeMsg is the violation text of a q component out of the domain.
const qRangeMsg = "must be a finite number within ±1e6 reciprocal-lattice units (D(q) is periodic: reduce q modulo 1), got %v"

// checkModeOptions checks the directions of StreamModes' options for a
// list of n points: VelocityDir finite (field "velocity_dir"), GammaDirs
// nil or one finite direction per point ("gamma_dirs").
func checkModeOptions(opt ModeOptions, n int) error {
	var vs Violations
	if !finite3(opt.VelocityDir) {
		vs.Add("velocity_dir", "must be finite, got %v", opt.VelocityDir)
	}
	if opt.GammaDirs != nil && len(opt.GammaDirs) != n {
		vs.Add("gamma_dirs", "must have one direction per point (%d), got %d", n, len(opt.GammaDirs))
	}
	for i, d := range opt.GammaDirs {
		if !finite3(d) {
			vs.Add(fmt.Sprintf("gamma_dirs[%d]", i), "must be finite, got %v", d)
		}
	}
	return vs.Err()
}

// finite3 reports whether every component of v is finite.
func finite3(v [3]float64) bool { return finite(v[0]) && finite(v[1]) && finite(v[2]) }

// IsGamma reports whether q (fractional) is a reciprocal lattice vector.
func IsGamma(q [3]float64) bool {
	for _, x := range q {
		if math.Abs(x-math.Round(x)) > 1e-12 {
			return false
		}
	}
	return true
}
