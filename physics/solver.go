// A reusable single-point solver and the site positions, for the packages
// above the core that need eigenvectors at points of their own choosing
// (physics/scatter: structure factors at arbitrary Q).

package physics

// PointSolver diagonalises D(q) at one point after another with one
// reusable workspace: nothing is allocated per point. It belongs to one
// goroutine; make one per worker.
type PointSolver struct {
	w    *pointWork
	freq []float64
}

// NewPointSolver returns a solver for m. When done is not nil, a solve of a
// large matrix (eigen.CancelCheckModes modes and more) polls it and gives
// up when it is closed.
func (m *Model) NewPointSolver(done <-chan struct{}) *PointSolver {
	return &PointSolver{w: m.newPointWork(done), freq: make([]float64, m.ModeCount())}
}

// Solve diagonalises D(q) (q fractional, finite, |qₖ| ≤ MaxQ: it panics
// otherwise, as FrequenciesTHz) and returns the frequencies in THz,
// ascending (imaginary modes negative, zero modes exactly 0), and the
// normalised eigenvectors, mode-major (vecs[k*n+c], c = site·p + axis;
// cell phase convention, doc.go). Both slices are the solver's own and are
// overwritten by the next Solve. ok is false when done was closed first.
func (s *PointSolver) Solve(q [3]float64) (freqTHz []float64, vecs []complex128, ok bool) {
	mustQ("PointSolver.Solve", q)
	if !s.w.solve(q, true) {
		return nil, nil, false
	}
	s.w.freqs(s.freq)
	return s.freq, s.w.eig.Vectors(), true
}

// SiteFrac returns the fractional position of site i (components past the
// dimensionality are 0): the positions the cell convention leaves out of
// the eigenvectors, which structure factors put back as exp(2πi Q·x).
func (m *Model) SiteFrac(i int) [3]float64 {
	var x [3]float64
	copy(x[:], m.frac[i])
	return x
}

// PointCost is the cost of a PointSolver: Bytes is its workspace
// (allocated once per solver), Flops the work of one Solve (assembly and
// diagonalisation with eigenvectors).
func (s GridSize) PointCost() Cost {
	n := s.Modes()
	return Cost{Bytes: workspaceBytes(n, true) + 8*int64(n) + 256, Flops: s.assembleFlops() + diagFlops(n, true)}
}
