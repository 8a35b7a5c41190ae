// Hermitian eigensolver for dynamical matrices.
//
// The method was chosen by measurement (BenchmarkHermitianEigen in
// eigen_test.go, three candidates on the same matrices in one run):
//
//   - Householder reduction of the Hermitian matrix to a real symmetric
//     tridiagonal one by complex reflectors (Householder, J. ACM 5, 339
//     (1958); Golub & Van Loan, Matrix Computations, 4th ed., §8.3.1), a
//     diagonal unitary phase being absorbed into the reflectors so that the
//     tridiagonal is real, followed by the implicit QL algorithm with
//     Wilkinson's shift on the tridiagonal (Bowdler, Martin, Reinsch &
//     Wilkinson, Numer. Math. 11, 293 (1968)) — in its root-free
//     Pal–Walker–Kahan form when only eigenvalues are asked (Parlett, The
//     Symmetric Eigenvalue Problem, §8.15). This is the one used.
//   - The real symmetric 2n×2n embedding [[A, −B], [B, A]] of H = A + iB,
//     solved by gonum's EigenSym (embed.go): 8× the arithmetic of the
//     complex reduction, a general-purpose library call with allocations,
//     and every eigenvalue twice. Kept as the fallback should QL ever fail
//     to converge, and as the reference in tests.
//   - A cyclic complex Jacobi method (eigen_test.go): simple and very
//     accurate, but several sweeps of O(n³) each, so it loses at every size.
//
// Measured in one run on this machine (2-core AMD EPYC at 2.6 GHz, one
// core busy with other work; go test -bench HermitianEigen), eigenvalues
// only / with eigenvectors, random Hermitian matrices:
//
//	n      Householder+QL     embedding (gonum)   complex Jacobi
//	3      0.34 / 0.40 µs     2.9 / 3.6 µs        1.3 / 1.7 µs
//	6      1.5 / 2.1 µs       7.1 / 12 µs         8.2 / 11 µs
//	24     21 / 77 µs         140 / 440 µs        610 / 810 µs
//	192    6.9 / 28 ms        35 / 170 ms         —
//
// so the reduction + QL is 5–7× faster than the embedding at every size
// and allocates nothing; on the dynamical matrices of the two-site crystal
// (BenchmarkTwoSiteEigenvalues) the 6×6 eigenvalue solve takes 1.15 µs.
//
// Accuracy: both stages are backward stable, so every eigenvalue is exact
// for a matrix within a few ε‖H‖ of the input; the tests ask for 1e-12 of
// the largest eigenvalue against gonum (the project asks for 1e-10).
//
// This path is unblocked: every step is a matrix–vector product, so from
// about 40–64 modes up LAPACK's blocked reduction on OpenBLAS is faster
// (1.3× at n = 96 for eigenvalues, 2× with eigenvectors, 2.3× and 4.4× at
// n = 768, one core). Builds with the lapack tag hand those sizes to
// LAPACK (lapack_cgo.go, dispatch.go); this path stays below the crossover,
// where it is the faster, and is the whole solver of the default build.

package eigen

import (
	"math"
	"math/cmplx"
	"slices"
)

// Epsilon is the unit round-off of float64, 2⁻⁵².
const Epsilon = 0x1p-52

// maxQLIterations bounds the QL sweeps spent on one eigenvalue; Wilkinson's
// shift converges globally and typically in two or three (Golub & Van
// Loan §8.3.5), so reaching the bound means the input was not finite.
const maxQLIterations = 50

// CancelCheckModes is the matrix size from which the solver polls for
// cancellation inside its loops; below it a whole solve takes microseconds.
// Large solves poll every PollRows+1 rows of their O(n²) inner steps, so
// that even n = 1536 (512 sites) stops within about a millisecond.
const (
	CancelCheckModes = 48
	PollRows         = 127
)

// Work is the reusable workspace of the Hermitian eigensolver for
// matrices of one size n. A caller fills the lower triangle of A() (row-major
// n×n; the strict upper triangle is never read) and calls Solve. Nothing is
// allocated after NewWork. A Work is not safe for concurrent use.
type Work struct {
	n    int
	a    []complex128 // input matrix, lower triangle; overwritten
	hv   []complex128 // Householder vectors: hv[k*n+i], i > k (hv[k*n+k+1] = 1); pure-Go path
	tau  []complex128 // reflector scalars
	y    []complex128 // scratch vector
	d, e []float64    // tridiagonal: diagonal and sub-diagonal (e[n-1] scratch)
	zt   []float64    // rotations of QL: row k is the k-th tridiagonal eigenvector; pure-Go path
	perm []int        // ascending order of d

	// Results of Solve.
	vals []float64    // eigenvalues, ascending
	vecs []complex128 // eigenvectors, mode-major: vecs[k*n+c]; only when asked

	// done, when not nil, is polled inside the loops of large solves; a
	// closed channel makes Solve return Stopped.
	done <-chan struct{}

	route   route          // which path Solve takes (dispatch.go)
	lapack  [2]*lapackWork // LAPACK workspaces, values and vectors, when used
	threads int            // OpenBLAS threads of the last LAPACK call
	onPoll  func()         // tests: called at each poll of done
}

// NewWork returns the workspace for n×n matrices. The workspace of each
// path and mode (eigenvalues, eigenvectors) is allocated by the first
// Solve that needs it and reused after.
func NewWork(n int) *Work {
	return &Work{
		n:    n,
		a:    make([]complex128, n*n),
		tau:  make([]complex128, n),
		y:    make([]complex128, n),
		d:    make([]float64, n),
		e:    make([]float64, n),
		perm: make([]int, n),
		vals: make([]float64, n),
	}
}

// N is the matrix size the workspace was made for.
func (w *Work) N() int { return w.n }

// A is the input matrix, row-major n×n, of which Solve reads the lower
// triangle and which it overwrites.
func (w *Work) A() []complex128 { return w.a }

// Values are the eigenvalues of the last Solve, ascending (the slice is
// reused by the next Solve).
func (w *Work) Values() []float64 { return w.vals }

// Vectors are the orthonormal eigenvectors of the last Solve that asked for
// them, mode-major: Vectors()[k*n+c] is component c of eigenvector k (the
// slice is reused by the next Solve).
func (w *Work) Vectors() []complex128 { return w.vecs }

// SetStop makes large solves poll done inside their loops: a closed channel
// makes Solve return Stopped. nil polls nothing.
func (w *Work) SetStop(done <-chan struct{}) { w.done = done }

// Status says why Solve did not produce a result.
type Status int

const (
	OK         Status = iota // eigenvalues (and vectors if asked) are in Values (and Vectors)
	Stopped                  // the stop channel was closed
	NoConverge               // QL did not converge (non-finite input)
)

// stopped polls done without blocking.
func (w *Work) stopped() bool {
	if w.done == nil {
		return false
	}
	if w.onPoll != nil {
		w.onPoll()
	}
	select {
	case <-w.done:
		return true
	default:
		return false
	}
}

// Solve computes the eigenvalues of the Hermitian matrix in w.a (lower
// triangle) into w.vals, ascending, and, when vectors is true, orthonormal
// eigenvectors into w.vecs. It returns NoConverge if QL did not
// converge (w.a is then destroyed; callers rebuild the matrix and use the
// real embedding of embed.go), Stopped if done was closed.
//
// In builds with the lapack tag, matrices of lapackMin modes and more go to
// LAPACK (lapackSolve), which cannot poll done inside a LAPACK call: it is
// polled between the calls (DEVELOPERS.md states the longest call). A
// NoConverge from that path leaves w.a destroyed too.
func (w *Work) Solve(vectors bool) Status {
	n := w.n
	if vectors && w.vecs == nil {
		w.vecs = make([]complex128, n*n)
	}
	if n == 1 {
		w.vals[0] = real(w.a[0])
		if vectors {
			w.vecs[0] = 1
		}
		return OK
	}
	// Scale by a power of two (exact) so that the largest element is not
	// far from 1: sqrt(a² + b²) below can then neither overflow nor lose
	// everything to underflow.
	useLAPACK := w.useLAPACK(vectors)
	amax, stop := w.maxElement(useLAPACK && vectors)
	if stop {
		return Stopped
	}
	if amax == 0 || math.IsInf(amax, 0) || math.IsNaN(amax) {
		return w.trivial(amax, vectors)
	}
	if amax < tinyMatrix {
		// Every eigenvalue is below tinyMatrix in magnitude (frequencies
		// below 1e-130 THz): zero to any use, and scaling such a matrix
		// up by 2^1000 and more would overflow.
		return w.trivial(0, vectors)
	}
	// Within 2^±200 nothing can overflow or underflow harmfully, and the
	// pass is skipped.
	_, exp := math.Frexp(amax)
	if exp > -200 && exp < 200 {
		exp = 0
	}
	if exp != 0 && w.scale(complex(math.Ldexp(1, -exp), 0)) {
		return Stopped
	}
	if useLAPACK {
		return w.solveLAPACK(vectors, math.Ldexp(1, exp))
	}
	if w.hv == nil {
		w.hv = make([]complex128, n*n)
	}
	if vectors && w.zt == nil {
		w.zt = make([]float64, n*n)
	}
	if w.tridiagonalize() {
		return Stopped
	}
	if vectors && w.identityZ() {
		return Stopped
	}
	// On NoConverge the caller still has the matrix and retries with the
	// real embedding (see Hermitian and pointWork.modes).
	if st := w.ql(vectors); st != OK {
		return st
	}
	w.sortValues(math.Ldexp(1, exp))
	if vectors && w.backTransform() {
		return Stopped
	}
	return OK
}

// solveLAPACK is Solve's LAPACK path on the scaled matrix in w.a (with
// vectors, conjugated by maxElement: see lapackSolve): the eigenvalues,
// multiplied by unscale, into w.vals and, with vectors, the eigenvectors
// into w.vecs. done is polled before, between and after the LAPACK calls.
func (w *Work) solveLAPACK(vectors bool, unscale float64) Status {
	if w.stopped() {
		return Stopped
	}
	if st := w.lapackSolve(vectors); st != OK {
		return st
	}
	for k, d := range w.d {
		w.vals[k] = d * unscale
	}
	if w.stopped() {
		return Stopped
	}
	return OK
}

// poll reports whether a large solve should stop at loop index i: it
// polls done every PollRows+1 rows when n ≥ CancelCheckModes.
func (w *Work) poll(i int) bool {
	return w.n >= CancelCheckModes && i&PollRows == PollRows && w.stopped()
}

// maxElement returns the largest |Re| or |Im| of the lower triangle of
// w.a (NaN if any element is NaN), and true when stopped. With conjugate
// it also replaces the lower triangle by its complex conjugate (for the
// LAPACK path with eigenvectors; see lapackSolve).
func (w *Work) maxElement(conjugate bool) (float64, bool) {
	n := w.n
	var amax float64
	for i := 0; i < n; i++ {
		if w.poll(i) {
			return 0, true
		}
		row := w.a[i*n : i*n+i+1]
		for j, z := range row {
			amax = max(amax, math.Abs(real(z)), math.Abs(imag(z)))
			if conjugate {
				row[j] = complex(real(z), -imag(z))
			}
		}
	}
	return amax, false
}

// scale multiplies the lower triangle of w.a by s; true when stopped.
func (w *Work) scale(s complex128) bool {
	n := w.n
	for i := 0; i < n; i++ {
		if w.poll(i) {
			return true
		}
		row := w.a[i*n : i*n+i+1]
		for j := range row {
			row[j] *= s
		}
	}
	return false
}

// identityZ sets w.zt to the identity, the start of the accumulated QL
// rotations; true when stopped.
func (w *Work) identityZ() bool {
	n := w.n
	for k := 0; k < n; k++ {
		if w.poll(k) {
			return true
		}
		row := w.zt[k*n : (k+1)*n]
		clear(row)
		row[k] = 1
	}
	return false
}

// sortValues orders the QL eigenvalues w.d into w.perm (ascending, ties
// by index) and writes them, multiplied by unscale, into w.vals.
func (w *Work) sortValues(unscale float64) {
	n, d := w.n, w.d
	for k := range w.perm {
		w.perm[k] = k
	}
	if n <= 32 {
		// Insertion sort of the index: n is small and the QL output is
		// nearly ordered.
		for i := 1; i < n; i++ {
			for j := i; j > 0 && d[w.perm[j]] < d[w.perm[j-1]]; j-- {
				w.perm[j], w.perm[j-1] = w.perm[j-1], w.perm[j]
			}
		}
	} else {
		slices.SortFunc(w.perm, func(a, b int) int {
			switch {
			case d[a] < d[b]:
				return -1
			case d[a] > d[b]:
				return 1
			}
			return a - b
		})
	}
	for k, j := range w.perm {
		w.vals[k] = d[j] * unscale
	}
}

// tinyMatrix is the largest element below which a matrix is taken as zero.
const tinyMatrix = 0x1p-900

// trivial handles a zero matrix (every eigenvalue 0, unit vectors) and a
// non-finite one (NaN results: such input cannot come from a validated
// model).
func (w *Work) trivial(amax float64, vectors bool) Status {
	n := w.n
	v := 0.0
	if amax != 0 {
		v = math.NaN()
	}
	for k := range w.vals {
		w.vals[k] = v
	}
	if vectors {
		clear(w.vecs)
		for k := 0; k < n; k++ {
			w.vecs[k*n+k] = complex(1, 0)
		}
		if amax != 0 {
			for k := range w.vecs {
				w.vecs[k] = cmplx.NaN()
			}
		}
	}
	return OK
}

// tridiagonalize reduces the Hermitian matrix in w.a (lower triangle) to the
// real symmetric tridiagonal T = Qᴴ A Q, Q = H₀H₁…H_{n−2}, H_k = I − τ_k v_k
// v_kᴴ, leaving T in w.d, w.e and the reflectors in w.hv, w.tau. Each
// reflector maps column k below the diagonal onto β e₁ with β real (the
// complex phase of the sub-diagonal element is absorbed into τ), so T is
// real. The rank-2 update A ← A − v wᴴ − w vᴴ, w = τ A v − ½|τ|²(vᴴAv) v,
// is Qᴴ A Q written out for one reflector. It returns true when stopped.
func (w *Work) tridiagonalize() bool {
	n, a := w.n, w.a
	poll := n >= CancelCheckModes
	for k := 0; k < n-1; k++ {
		if poll && w.stopped() {
			return true
		}
		w.d[k] = real(a[k*n+k])
		if !w.reflector(k) {
			continue
		}
		if w.reflectTrailing(k) {
			return true
		}
	}
	w.d[n-1] = real(a[(n-1)*n+n-1])
	return false
}

// reflector builds H_k, the reflector that maps column k of w.a below the
// diagonal onto β e₁ with β real: v (in w.hv, v[k+1] = 1) and τ (w.tau[k]),
// and sets w.e[k] = β. It returns false when the column is already in
// that form (H_k = I) and nothing needs reflecting.
//
// A column far below the matrix's scale (elements under 2⁻⁴⁵⁰, whose
// squares leave the normal range) is first brought near 1 by a power of
// two (columnUp): its squares would otherwise underflow, β come out 0 and
// τ infinite. v and τ do not depend on that factor; β is scaled back.
func (w *Work) reflector(k int) bool {
	n, a := w.n, w.a
	xnorm2 := w.columnNorm2(k)
	alpha := a[(k+1)*n+k]
	ar, ai := real(alpha), imag(alpha)
	up := 0
	if ar*ar+ai*ai+xnorm2 < tinyColumn2 {
		if up = w.columnUp(k); up != 0 {
			xnorm2 = w.columnNorm2(k)
			alpha = a[(k+1)*n+k]
			ar, ai = real(alpha), imag(alpha)
		}
	}
	if xnorm2 == 0 && ai == 0 {
		w.tau[k] = 0
		w.e[k] = math.Ldexp(ar, -up)
		return false
	}
	beta := -math.Copysign(math.Sqrt(ar*ar+ai*ai+xnorm2), ar)
	ib := 1 / beta
	tau := complex((beta-ar)*ib, -ai*ib)
	v := w.hv[k*n : (k+1)*n]
	v[k+1] = 1
	if k+2 < n {
		// 1/(α − β) as conj/|·|²: one real division instead of
		// the runtime's careful complex one (safe after scaling).
		zr, zi := ar-beta, ai
		inv := 1 / (zr*zr + zi*zi)
		scale := complex(zr*inv, -zi*inv)
		for i := k + 2; i < n; i++ {
			v[i] = a[i*n+k] * scale
		}
	}
	w.tau[k] = tau
	w.e[k] = math.Ldexp(beta, -up)
	return true
}

// tinyColumn2 is the squared norm below which reflector rescales a column.
// Above it, what the squares that fall below the normal range (2⁻¹⁰²²)
// lose is under n·2⁻¹⁷⁴ of the norm; below it, it could be all of it.
const tinyColumn2 = 0x1p-900

// columnNorm2 is the squared norm of column k of w.a below the
// sub-diagonal (rows k+2…n−1).
func (w *Work) columnNorm2(k int) float64 {
	n, a := w.n, w.a
	var xnorm2 float64
	for i := k + 2; i < n; i++ {
		z := a[i*n+k]
		xnorm2 += real(z)*real(z) + imag(z)*imag(z)
	}
	return xnorm2
}

// columnUp multiplies column k of w.a below the diagonal by 2^up, the
// power of two (exact, denormals included) that brings its largest |Re|
// or |Im| into [½, 1), and returns up (0 for a zero column). The column
// is not read again once its reflector is built.
func (w *Work) columnUp(k int) int {
	n, a := w.n, w.a
	var cmax float64
	for i := k + 1; i < n; i++ {
		z := a[i*n+k]
		cmax = max(cmax, math.Abs(real(z)), math.Abs(imag(z)))
	}
	if cmax == 0 {
		return 0
	}
	_, exp := math.Frexp(cmax)
	up := -exp
	for i := k + 1; i < n; i++ {
		z := a[i*n+k]
		a[i*n+k] = complex(math.Ldexp(real(z), up), math.Ldexp(imag(z), up))
	}
	return up
}

// reflectTrailing applies H_k on both sides of the trailing block
// A[k+1:, k+1:] (lower triangle): A ← A − v wᴴ − w vᴴ with
// w = τ A v − ½ τ (τ A v)ᴴv v, the two-sided update of Golub & Van Loan
// §8.3.1 written out. It returns true when stopped.
func (w *Work) reflectTrailing(k int) bool {
	n, a := w.n, w.a
	poll := n >= CancelCheckModes
	tau := w.tau[k]
	// y = A v on the trailing block (Hermitian, lower triangle stored).
	// The slices start at k+1 so that the loops carry no bounds checks.
	m := n - k - 1
	vs := w.hv[k*n+k+1 : (k+1)*n]
	ys := w.y[k+1 : n]
	clear(ys)
	for i := 0; i < m; i++ {
		if poll && i&PollRows == PollRows && w.stopped() {
			return true
		}
		row := a[(k+1+i)*n+k+1 : (k+1+i)*n+k+2+i]
		vi := vs[i]
		var s complex128
		rs, vj, yj := row[:i], vs[:i], ys[:i]
		for j, r := range rs {
			s += r * vj[j]
			yj[j] += complex(real(r), -imag(r)) * vi
		}
		ys[i] += s + complex(real(row[i]), 0)*vi
	}
	// w = τ y − ½ τ (τy)ᴴv v.
	var xv complex128
	for i, yi := range ys {
		yi *= tau
		ys[i] = yi
		xv += complex(real(yi), -imag(yi)) * vs[i]
	}
	half := -0.5 * tau * xv
	for i := range ys {
		ys[i] += half * vs[i]
	}
	// A ← A − v yᴴ − y vᴴ on the lower triangle of the trailing block.
	for i := 0; i < m; i++ {
		if poll && i&PollRows == PollRows && w.stopped() {
			return true
		}
		row := a[(k+1+i)*n+k+1 : (k+1+i)*n+k+2+i]
		vi, yi := vs[i], ys[i]
		vj, yj := vs[:len(row)], ys[:len(row)]
		for j := range row {
			row[j] -= vi*complex(real(yj[j]), -imag(yj[j])) + yi*complex(real(vj[j]), -imag(vj[j]))
		}
	}
	return false
}

// ql diagonalises the tridiagonal (w.d, w.e) by the implicit QL algorithm
// with Wilkinson's shift, as in the procedures tql/imtql of Bowdler, Martin,
// Reinsch & Wilkinson (Numer. Math. 11, 293 (1968)): for each l, sweeps of
// Givens rotations chase the bulge from the first negligible sub-diagonal
// element m up to l until e[l] is negligible (tridiagTol). A 2×2 block
// left over is diagonalised directly. With vectors, each
// rotation is also applied to rows i, i+1 of w.zt (rows of zt are the
// eigenvectors of T, a layout that keeps the update contiguous); without,
// the root-free variant qlValues is used.
func (w *Work) ql(vectors bool) Status {
	if !vectors {
		return w.qlValues()
	}
	n, e := w.n, w.e
	tol := w.tridiagTol()
	e[n-1] = 0
	poll := n >= CancelCheckModes
	for l := 0; l < n; l++ {
		for iter := 0; ; iter++ {
			m := l
			for ; m < n-1; m++ {
				if math.Abs(e[m]) <= tol {
					break
				}
			}
			if m == l {
				break
			}
			if m == l+1 {
				w.rotate2(l)
				break
			}
			if iter == maxQLIterations {
				return NoConverge
			}
			if poll && w.stopped() {
				return Stopped
			}
			if st := w.qlSweep(l, m); st != OK {
				return st
			}
		}
	}
	return OK
}

// qlSweep is one implicit QL sweep on the block l..m of the tridiagonal:
// Wilkinson's shift folded into the first Givens rotation, the bulge
// chased from m up to l, each rotation also applied to rows i, i+1 of
// w.zt. If a rotation vanishes the block has split and the sweep ends
// early (the caller looks for the split again). It returns Stopped when
// done closed mid-sweep (the result is then abandoned), else OK.
func (w *Work) qlSweep(l, m int) Status {
	n, d, e := w.n, w.d, w.e
	poll := n >= CancelCheckModes
	// Shift: the eigenvalue of the leading 2×2 block at l nearer
	// d[l], folded into the first rotation.
	g := (d[l+1] - d[l]) / (2 * e[l])
	r := math.Abs(g)
	if r < 1e150 {
		r = math.Sqrt(g*g + 1)
	}
	g = d[m] - d[l] + e[l]/(g+math.Copysign(r, g))
	s, c, p := 1.0, 1.0, 0.0
	for i := m - 1; i >= l; i-- {
		f := s * e[i]
		b := c * e[i]
		// sqrt(f² + g²): no overflow after scaling, and an
		// underflow to 0 only when both are negligible next to
		// the norm (≥ 2⁻²⁰⁰), which the split below treats right.
		r = math.Sqrt(f*f + g*g)
		e[i+1] = r
		if r == 0 {
			// The bulge vanished: the problem splits at i+1.
			d[i+1] -= p
			e[m] = 0
			return OK
		}
		s = f / r
		c = g / r
		g = d[i+1] - p
		r = (d[i]-g)*s + 2*c*b
		p = s * r
		d[i+1] = g + p
		g = c*r - b
		zi := w.zt[i*n : (i+1)*n]
		zj := w.zt[(i+1)*n : (i+2)*n]
		zj = zj[:len(zi)]
		for k, x := range zi {
			t := zj[k]
			zj[k] = s*x + c*t
			zi[k] = c*x - s*t
		}
		if poll && i&PollRows == 0 && w.stopped() {
			return Stopped // mid-sweep: the result is abandoned
		}
	}
	d[l] -= p
	e[l] = g
	e[m] = 0
	return OK
}

// tridiagTol is the size below which a sub-diagonal element of the
// tridiagonal counts as zero: ε‖T‖, with ‖T‖ bounded by max |d| + 2 max |e|.
// The reduction already made errors of ε‖A‖ in every eigenvalue, so a test
// relative to each |d| (as in the classic tql) would buy only iterations.
func (w *Work) tridiagTol() float64 {
	var dmax, emax float64
	for i := 0; i < w.n; i++ {
		dmax = max(dmax, math.Abs(w.d[i]))
		if i < w.n-1 {
			emax = max(emax, math.Abs(w.e[i]))
		}
	}
	return Epsilon * (dmax + 2*emax)
}

// jacobi2 returns the rotation (c, s) and the eigenvalues (λ₁, λ₂) of the
// symmetric 2×2 matrix [[a, b], [b, d]]: (c, −s) is the eigenvector of λ₁ =
// a − t b and (s, c) that of λ₂ = d + t b, with t = s/c the smaller root of
// t² + 2ζt − 1 = 0, ζ = (d − a)/2b (the Jacobi rotation; Golub & Van Loan
// §8.5.2, whose update formulas are the stable way to the eigenvalues).
func jacobi2(a, b, d float64) (c, s, l1, l2 float64) {
	if b == 0 {
		return 1, 0, a, d
	}
	zeta := (d - a) / (2 * b)
	var t float64
	if math.Abs(zeta) > 1e150 {
		t = 0.5 / zeta
	} else {
		t = 1 / (math.Abs(zeta) + math.Sqrt(zeta*zeta+1))
		if zeta < 0 {
			t = -t
		}
	}
	c = 1 / math.Sqrt(1+t*t)
	return c, t * c, a - t*b, d + t*b
}

// rotate2 diagonalises the 2×2 block at (l, l+1) of the tridiagonal and
// applies its rotation to rows l, l+1 of w.zt.
func (w *Work) rotate2(l int) {
	n := w.n
	c, s, l1, l2 := jacobi2(w.d[l], w.e[l], w.d[l+1])
	w.d[l], w.d[l+1], w.e[l] = l1, l2, 0
	zi := w.zt[l*n : (l+1)*n]
	zj := w.zt[(l+1)*n : (l+2)*n]
	zj = zj[:len(zi)]
	for k, x := range zi {
		t := zj[k]
		zi[k] = c*x - s*t
		zj[k] = s*x + c*t
	}
}

// qlValues is the eigenvalues-only QL: the root-free variant of Pal, Walker
// and Kahan as described by Parlett (The Symmetric Eigenvalue Problem,
// SIAM 1998, §8.15), which works on the squares e² of the sub-diagonal and
// needs no square root per rotation; the shift is that of ql.
func (w *Work) qlValues() Status {
	n, d, e2 := w.n, w.d, w.e
	tol := w.tridiagTol()
	for i := 0; i < n-1; i++ {
		e2[i] *= e2[i]
	}
	e2[n-1] = 0
	tol2 := tol * tol
	for l := 0; l < n; l++ {
		for iter := 0; ; iter++ {
			m := l
			for ; m < n-1; m++ {
				if e2[m] <= tol2 {
					break
				}
			}
			if m == l {
				break
			}
			if m == l+1 {
				_, _, d[l], d[l+1] = jacobi2(d[l], math.Sqrt(e2[l]), d[l+1])
				e2[l] = 0
				break
			}
			if iter == maxQLIterations {
				return NoConverge
			}
			// Wilkinson's shift, the eigenvalue of the leading 2×2 block
			// nearer d[l]: σ = d_l − e²/(δ + sign(δ) sqrt(δ² + e²)),
			// δ = (d_{l+1} − d_l)/2 (no overflow after scaling).
			delta := (d[l+1] - d[l]) / 2
			sigma := d[l] - e2[l]/(delta+math.Copysign(math.Sqrt(delta*delta+e2[l]), delta))
			c, s := 1.0, 0.0
			gamma := d[m] - sigma
			p := gamma * gamma
			// The sweep runs on the block [l, m]; dd and ee are resliced
			// so that the loop carries no bounds checks.
			dd, ee := d[l:m+1], e2[l:m+1]
			for i := m - l - 1; i >= 0; i-- {
				bb := ee[i]
				r := p + bb
				if i != m-l-1 {
					ee[i+1] = s * r
				}
				// c = p/r and the next p = γ²/c = γ² r/p: the two
				// reciprocals are independent, which shortens the
				// sweep's dependency chain.
				invR := 1 / r
				oldc := c
				c = p * invR
				s = bb * invR
				oldgam := gamma
				alpha := dd[i]
				gamma = c*(alpha-sigma) - s*oldgam
				dd[i+1] = oldgam + (alpha - gamma)
				if c != 0 {
					p = gamma * gamma * (r / p)
				} else {
					p = oldc * bb
				}
			}
			e2[l] = s * p
			d[l] = sigma + gamma
		}
	}
	return OK
}

// backTransform forms the eigenvectors of A, x = Q z = H₀(H₁(…H_{n−2} z)),
// from the tridiagonal eigenvectors (rows of w.zt) in ascending order of
// eigenvalue, into w.vecs (mode-major). It returns true when stopped.
func (w *Work) backTransform() bool {
	n := w.n
	poll := n >= CancelCheckModes
	for k, j := range w.perm {
		if poll && w.stopped() {
			return true
		}
		x := w.vecs[k*n : (k+1)*n]
		z := w.zt[j*n : (j+1)*n]
		for c := range x {
			x[c] = complex(z[c], 0)
		}
		for r := n - 2; r >= 0; r-- {
			if poll && r&PollRows == 0 && w.stopped() {
				return true
			}
			tau := w.tau[r]
			if tau == 0 {
				continue
			}
			v := w.hv[r*n : (r+1)*n]
			// x ← x − τ v (vᴴ x) on components r+1…n−1.
			var dot complex128
			for i := r + 1; i < n; i++ {
				dot += complex(real(v[i]), -imag(v[i])) * x[i]
			}
			dot *= tau
			for i := r + 1; i < n; i++ {
				x[i] -= dot * v[i]
			}
		}
	}
	return false
}

// Hermitian returns the eigenvalues of the Hermitian n×n matrix h
// (row-major, full storage; only the lower triangle is read) in ascending
// order and, when vectors is true, orthonormal eigenvectors, mode-major:
// vecs[k*n+c] is component c of mode k. It allocates; hot loops keep a
// Work instead.
func Hermitian(h []complex128, n int, vectors bool) ([]float64, []complex128) {
	w := NewWork(n)
	copy(w.a, h[:n*n])
	if w.Solve(vectors) == NoConverge {
		return Embedded(h, n, vectors)
	}
	return w.vals, w.vecs
}
