// Group velocities by the Hellmann–Feynman theorem, and sound velocities.
//
// For a non-degenerate mode, ∂λ/∂q_α = eᴴ (∂D/∂q_α) e (Hellmann–Feynman;
// e.g. Dove, Introduction to Lattice Dynamics, ch. 4 for the phonon form),
// and with λ = ω², v_α = ∂ω/∂q_α = eᴴ(∂D/∂q_α)e / 2ω. Inside a degenerate
// subspace the eigenvectors are arbitrary and so would be the velocities;
// first-order degenerate perturbation theory says that moving q along a
// direction u splits the subspace along the eigenvectors of the projected
// u·∂D/∂q, whose eigenvalues are the split slopes. The engine therefore
// rotates each degenerate subspace to those eigenvectors before taking the
// expectation values, so that velocities follow the branches that leave
// the degeneracy along u instead of jumping between them.

package physics

import (
	"math"
	"math/cmplx"

	"github.com/materials-lab/modegrid/physics/eigen"
	"github.com/materials-lab/modegrid/physics/lattice"
)

// VelocityUnitKmS is the group velocity in km/s of a slope of
// 1 Å·sqrt(eV/Å²/amu) (the engine's internal unit), ≈ 9.82269 km/s.
var VelocityUnitKmS = OmegaUnitRadPerS * 1e-10 / 1e3

// Degeneracy and zero-mode tolerances for velocities, relative to the
// model's bound on |λ| (Model.lambdaScale).
const (
	// degenerateTol groups modes with |λ_k − λ_{k+1}| below it: eigenvector
	// errors inside a cluster scale as ε‖D‖/gap, so clusters closer than
	// this are treated as one subspace.
	degenerateTol = 1e-9
	// zeroModeTol: modes with |λ| below it (the acoustic modes at Γ) get
	// velocity 0; their slope depends on the direction of approach (see
	// SoundVelocities).
	zeroModeTol = 1e-12
)

// defaultVelocityDir is the generic direction used to split degenerate
// subspaces when none is given: no symmetry direction of any lattice.
var defaultVelocityDir = [3]float64{0.8017837257372732, 0.5345224838248488, 0.2672612419124244}

// velWork is the scratch of group velocities for one worker.
type velWork struct {
	n    int
	grad [3][]complex128 // lower triangles of ∂D/∂q_α
	y    [3][]complex128 // ∂D/∂q_α e_k for the modes of one cluster, k-major
	sub  map[int]*eigen.Work
	tmp  []complex128
}

func newVelWork(m *Model) *velWork {
	n := m.ModeCount()
	v := &velWork{n: n, sub: map[int]*eigen.Work{}, tmp: make([]complex128, n*n)}
	for a := range v.grad {
		v.grad[a] = make([]complex128, n*n)
		v.y[a] = make([]complex128, n*n)
	}
	return v
}

// hemv computes y = G x for a Hermitian G stored as its lower triangle.
// If stop is not nil it is polled every eigen.PollRows+1 rows, and hemv returns
// false (y unfinished) when it says so.
func hemv(g []complex128, n int, x, y []complex128, stop func() bool) bool {
	clear(y[:n])
	for i := 0; i < n; i++ {
		if stop != nil && i&eigen.PollRows == eigen.PollRows && stop() {
			return false
		}
		row := g[i*n : i*n+i+1]
		xi := x[i]
		var s complex128
		for j, r := range row[:i] {
			s += r * x[j]
			y[j] += complex(real(r), -imag(r)) * xi
		}
		y[i] += s + complex(real(row[i]), 0)*xi
	}
	return true
}

func dotc(a, b []complex128) complex128 {
	var s complex128
	for i, x := range a {
		s += complex(real(x), -imag(x)) * b[i]
	}
	return s
}

// velocities writes the group velocity (km/s, Cartesian) of every mode at q
// into out, from the eigenvalues and eigenvectors of the last solve of pw,
// rotating the eigenvectors inside degenerate subspaces as described
// above (pw.eig.Vectors() is updated accordingly). dir zero means
// defaultVelocityDir. It returns false if stopped.
func (v *velWork) velocities(pw *pointWork, q [3]float64, dir [3]float64, out [][3]float64) bool {
	n := v.n
	m := pw.m
	var stop func() bool
	if n >= eigen.CancelCheckModes && pw.done != nil {
		stop = pw.stopped
	}
	if !m.assembleGrad(q, &v.grad, &pw.ph, stop) {
		return false
	}
	if lattice.Norm(dir) == 0 {
		dir = defaultVelocityDir
	}
	dir = lattice.Scale(dir, 1/lattice.Norm(dir))
	vals, vecs := pw.eig.Values(), pw.eig.Vectors()
	// The model's eigenvalue bound, not this point's largest eigenvalue:
	// at Γ of a one-site model every eigenvalue is rounding noise.
	scale := m.lambdaScale
	for lo := 0; lo < n; {
		hi := lo + 1
		for hi < n && vals[hi]-vals[hi-1] <= degenerateTol*scale {
			hi++
		}
		size := hi - lo
		// y_α,k = ∂D/∂q_α e_k for the cluster.
		for k := lo; k < hi; k++ {
			for a := 0; a < 3; a++ {
				if !hemv(v.grad[a], n, vecs[k*n:(k+1)*n], v.y[a][(k-lo)*n:(k-lo+1)*n], stop) {
					return false
				}
			}
		}
		if size > 1 {
			v.rotate(lo, hi, dir, vecs)
		}
		for k := lo; k < hi; k++ {
			lam := vals[k]
			if math.Abs(lam) <= zeroModeTol*scale {
				out[k] = [3]float64{}
				continue
			}
			inv := VelocityUnitKmS / (2 * math.Sqrt(math.Abs(lam)))
			e := vecs[k*n : (k+1)*n]
			for a := 0; a < 3; a++ {
				out[k][a] = real(dotc(e, v.y[a][(k-lo)*n:(k-lo+1)*n])) * inv
			}
		}
		lo = hi
	}
	return true
}

// rotate diagonalises u·∂D/∂q inside the degenerate cluster [lo, hi) and
// rotates the cluster's eigenvectors (and their y vectors) to its
// eigenvectors.
func (v *velWork) rotate(lo, hi int, u [3]float64, vecs []complex128) {
	n, size := v.n, hi-lo
	w := v.sub[size]
	if w == nil {
		w = eigen.NewWork(size)
		v.sub[size] = w
	}
	for k := 0; k < size; k++ {
		ek := vecs[(lo+k)*n : (lo+k+1)*n]
		for l := 0; l <= k; l++ {
			var z complex128
			for a := 0; a < 3; a++ {
				if u[a] != 0 {
					z += complex(u[a], 0) * dotc(ek, v.y[a][l*n:(l+1)*n])
				}
			}
			w.A()[k*size+l] = z
		}
	}
	// Scale to order one: the eigenvectors do not change, and entries far
	// below 1 (at Γ of a nearly centro-symmetric model ∂D/∂q is ~0) would
	// otherwise underflow inside the solver and come back as NaN.
	var amax float64
	for k := 0; k < size; k++ {
		for l := 0; l <= k; l++ {
			amax = math.Max(amax, cmplx.Abs(w.A()[k*size+l]))
		}
	}
	if !(amax > 1e-290) || math.IsInf(amax, 0) {
		return // no splitting to follow (or nothing finite): keep the basis
	}
	for k := 0; k < size; k++ {
		for l := 0; l <= k; l++ {
			w.A()[k*size+l] /= complex(amax, 0)
		}
	}
	if w.Solve(true) != eigen.OK {
		return // keep the basis: velocities are then those of the solver's vectors
	}
	for _, c := range w.Vectors()[:size*size] {
		if cmplx.IsNaN(c) {
			return
		}
	}
	// new e_k = Σ_l old e_l U_lk, U_lk = w.Vectors()[k*size+l]; the same for y.
	rot := func(src []complex128) {
		tmp := v.tmp[:size*n]
		clear(tmp)
		for k := 0; k < size; k++ {
			dst := tmp[k*n : (k+1)*n]
			for l := 0; l < size; l++ {
				c := w.Vectors()[k*size+l]
				if c == 0 {
					continue
				}
				s := src[l*n : (l+1)*n]
				for i := range dst {
					dst[i] += c * s[i]
				}
			}
		}
		copy(src[:size*n], tmp)
	}
	rot(vecs[lo*n : hi*n])
	for a := 0; a < 3; a++ {
		rot(v.y[a][:size*n])
	}
}
