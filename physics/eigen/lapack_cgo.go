//go:build lapack && cgo

// The LAPACK path of the solver (build tag lapack), for matrices from the
// crossover sizes of dispatch.go up: the system's OpenBLAS (its LAPACK
// included) through cgo. Build: CGO_ENABLED=1 go build -tags lapack with
// libopenblas-dev installed (Debian/Ubuntu); the binary then needs
// libopenblas0 (and the Fortran runtime it pulls in) to run.
//
// Method: the stages of LAPACK's Hermitian eigensolvers (Anderson et al.,
// LAPACK Users' Guide, 3rd ed., SIAM 1999, §2.4.4 and §3.4.1): blocked
// Householder reduction to real tridiagonal form, zhetrd, whose panels
// (zlatrd) feed a rank-2k update (zher2k) so that half the work is a
// matrix–matrix product (Dongarra, Hammarling & Sorensen, J. Comput. Appl.
// Math. 27, 215 (1989)); then the root-free QL of dsterf for eigenvalues
// only, or, with eigenvectors, the divide and conquer of zstedc (Cuppen,
// Numer. Math. 36, 177 (1981); Gu & Eisenstat, SIAM J. Matrix Anal. Appl.
// 16, 172 (1995)) and zunmtr applying the reflectors to the eigenvectors
// (blocked, matrix–matrix). These are zheevd's stages; they are called one
// by one from Go, the loop of zhetrd written out, so that a stop channel is
// polled between panels and between column blocks of zunmtr: a solve of
// n = 768 is cut into about 30 uninterruptible pieces.
//
// Chosen by measurement on this machine, one core, CPU time:
//   - zheevr against zheevd, one call each (BenchmarkLAPACKDrivers at the
//     time): equal within 5 % for eigenvalues, and zheevr 0–5 % faster with
//     eigenvectors from n = 96 up (205 against 217 ms at n = 768).
//   - The stages one by one, zstedc against zheevr's zstemr (relatively
//     robust representations; Dhillon, Parlett & Vömel, ACM Trans. Math.
//     Softw. 32, 533 (2006)) for the tridiagonal eigenpairs
//     (BenchmarkTridiagonalStage): zstedc 3–9 % faster at every size from
//     n = 64 to 1 536 (918 against 958 µs at n = 96, 205 against 218 ms at
//     768, 1.50 against 1.64 s at 1 536), level at 40, for a workspace of
//     2n² reals more. So zstedc, with zstemr kept for the benchmark.
//   - The stages one by one cost what one call of the driver costs
//     (BenchmarkLAPACKDrivers); DEVELOPERS.md, "Measured: eigensolver size
//     ladder", has the table against numpy.

package eigen

/*
#cgo LDFLAGS: -lopenblas
#include <complex.h>
#include <stddef.h>

// LAPACK and BLAS (Fortran, LP64: INTEGER is a C int; the hidden lengths of
// the CHARACTER arguments are size_t at the end, as gfortran passes them).
int ilaenv_(const int *ispec, const char *name, const char *opts,
	const int *n1, const int *n2, const int *n3, const int *n4, size_t, size_t);
void zlatrd_(const char *uplo, const int *n, const int *nb, double complex *a,
	const int *lda, double *e, double complex *tau, double complex *w,
	const int *ldw, size_t);
void zher2k_(const char *uplo, const char *trans, const int *n, const int *k,
	const double complex *alpha, const double complex *a, const int *lda,
	const double complex *b, const int *ldb, const double *beta,
	double complex *c, const int *ldc, size_t, size_t);
void zhetd2_(const char *uplo, const int *n, double complex *a, const int *lda,
	double *d, double *e, double complex *tau, int *info, size_t);
void dsterf_(const int *n, double *d, double *e, int *info);
void zstemr_(const char *jobz, const char *range, const int *n, double *d,
	double *e, const double *vl, const double *vu, const int *il,
	const int *iu, int *m, double *w, double complex *z, const int *ldz,
	const int *nzc, int *isuppz, int *tryrac, double *work, const int *lwork,
	int *iwork, const int *liwork, int *info, size_t, size_t);
void zsteqr_(const char *compz, const int *n, double *d, double *e,
	double complex *z, const int *ldz, double *work, int *info, size_t);
void zstedc_(const char *compz, const int *n, double *d, double *e,
	double complex *z, const int *ldz, double complex *work, const int *lwork,
	double *rwork, const int *lrwork, int *iwork, const int *liwork, int *info,
	size_t);
void zunmtr_(const char *side, const char *uplo, const char *trans,
	const int *m, const int *n, const double complex *a, const int *lda,
	const double complex *tau, double complex *c, const int *ldc,
	double complex *work, const int *lwork, int *info, size_t, size_t, size_t);
void zheevr_(const char *jobz, const char *range, const char *uplo, const int *n,
	double complex *a, const int *lda, const double *vl, const double *vu,
	const int *il, const int *iu, const double *abstol, int *m, double *w,
	double complex *z, const int *ldz, int *isuppz,
	double complex *work, const int *lwork, double *rwork, const int *lrwork,
	int *iwork, const int *liwork, int *info, size_t, size_t, size_t);

void openblas_set_num_threads(int);
int openblas_get_num_threads(void);
int openblas_get_num_procs(void);
char *openblas_get_config(void);

// The stages of zheevd and zheevr (all eigenvalues, upper triangle), one call each,
// so that the caller can poll for cancellation between them. Every matrix
// is n×n, column-major, leading dimension n.

// mg_ilaenv is ilaenv's block size (ispec 1) or crossover (ispec 3) of
// zhetrd for order n.
static int mg_ilaenv(int ispec, int n) {
	int m1 = -1;
	return ilaenv_(&ispec, "ZHETRD", "U", &n, &m1, &m1, &m1, 6, 1);
}

// mg_panel is one step of zhetrd's blocked loop: zlatrd reduces the last
// nb columns of the leading m×m block (its update of the rest in w), on t2
// OpenBLAS threads, and zher2k applies that update to the leading
// (m−nb)×(m−nb) block on t3 threads (OpenBLAS is left on one thread).
static void mg_panel(int n, int m, int nb, double complex *a, double *e,
	double complex *tau, double complex *w, int t2, int t3) {
	char uplo = 'U', trans = 'N';
	double complex alpha = -1;
	double beta = 1;
	int k = m - nb;
	if (t2 > 1) openblas_set_num_threads(t2);
	zlatrd_(&uplo, &m, &nb, a, &n, e, tau, w, &n, 1);
	if (t3 != t2) openblas_set_num_threads(t3);
	zher2k_(&uplo, &trans, &k, &nb, &alpha, a + (size_t)k * n, &n, w, &n,
		&beta, a, &n, 1, 1);
	if (t3 > 1) openblas_set_num_threads(1);
}

// mg_zhetd2 reduces the leading k×k block unblocked.
static int mg_zhetd2(int n, int k, double complex *a, double *d, double *e,
	double complex *tau) {
	char uplo = 'U';
	int info = 0;
	zhetd2_(&uplo, &k, a, &n, d, e, tau, &info, 1);
	return info;
}

static int mg_dsterf(int n, double *d, double *e) {
	int info = 0;
	dsterf_(&n, d, e, &info);
	return info;
}

// mg_zstemr: all eigenpairs of the tridiagonal (d, e) by relatively robust
// representations, eigenvalues into w and eigenvectors into z; lwork = -1
// asks for the workspace sizes instead.
static int mg_zstemr(int n, double *d, double *e, double *w, double complex *z,
	int *isuppz, double *work, int lwork, int *iwork, int liwork) {
	char jobz = 'V', range = 'A';
	int m = 0, il = 1, iu = n, tryrac = 1, info = 0;
	double vl = 0, vu = 0;
	zstemr_(&jobz, &range, &n, d, e, &vl, &vu, &il, &iu, &m, w, z, &n, &n,
		isuppz, &tryrac, work, &lwork, iwork, &liwork, &info, 1, 1);
	return info;
}

// mg_zstedc: all eigenpairs of the tridiagonal (d, e) by divide and
// conquer, eigenvalues into d and eigenvectors into z; lwork = -1 asks for
// the workspace sizes instead.
static int mg_zstedc(int n, double *d, double *e, double complex *z,
	double complex *work, int lwork, double *rwork, int lrwork, int *iwork,
	int liwork) {
	char compz = 'I';
	int info = 0;
	zstedc_(&compz, &n, d, e, z, &n, work, &lwork, rwork, &lrwork, iwork,
		&liwork, &info, 1);
	return info;
}

// mg_zsteqr: all eigenpairs of the tridiagonal (d, e) by implicit QL/QR,
// eigenvectors into z (work: 2n−2 reals).
static int mg_zsteqr(int n, double *d, double *e, double complex *z, double *work) {
	char compz = 'I';
	int info = 0;
	zsteqr_(&compz, &n, d, e, z, &n, work, &info, 1);
	return info;
}

// mg_zunmtr applies the reflectors of the reduction (in a and tau) to the
// n×cols block c: c ← Q c; lwork = -1 asks for the workspace size.
// On t OpenBLAS threads (OpenBLAS is left on one thread).
static int mg_zunmtr(int n, int cols, const double complex *a,
	const double complex *tau, double complex *c, double complex *work, int lwork,
	int t) {
	char side = 'L', uplo = 'U', trans = 'N';
	int info = 0;
	if (t > 1) openblas_set_num_threads(t);
	zunmtr_(&side, &uplo, &trans, &n, &cols, a, &n, tau, c, &n, work, &lwork,
		&info, 1, 1, 1);
	if (t > 1) openblas_set_num_threads(1);
	return info;
}

// mg_zheevr is the driver the stages above take apart (benchmarks and
// tests compare them); lwork = -1 asks for the workspace sizes.
static int mg_zheevr(int vectors, int n, double complex *a, double *w,
	double complex *z, int *isuppz,
	double complex *work, int lwork, double *rwork, int lrwork,
	int *iwork, int liwork) {
	char jobz = vectors ? 'V' : 'N', range = 'A', uplo = 'U';
	int info = 0, m = 0, il = 1, iu = n;
	double vl = 0, vu = 0, abstol = 0;
	zheevr_(&jobz, &range, &uplo, &n, a, &n, &vl, &vu, &il, &iu, &abstol,
		&m, w, z, &n, isuppz, work, &lwork, rwork, &lrwork,
		iwork, &liwork, &info, 1, 1, 1);
	return info;
}
*/
import "C"

import (
	"math"
	"os"
	"runtime"
	"runtime/metrics"
	"strconv"
	"sync"
	"unsafe"
)

// lapackLinked: this build has the LAPACK path.
const lapackLinked = true

// lapackBlockCols is the width of the column blocks in which the
// back-transformation applies the reflectors, with a poll between blocks.
const lapackBlockCols = 256

// divideConquerMax: below this order the tridiagonal eigenpairs come from
// zstedc (divide and conquer, as in zheevd), from it up from zstemr (as in
// zheevr): zstedc at every size, measured faster (see the top of the
// file). A variable for BenchmarkTridiagonalStage.
var divideConquerMax = math.MaxInt

// lapackWork is the LAPACK workspace of one Work and mode (values or
// vectors), sized once by the stages' workspace queries: O(n) numbers
// besides the n×n matrices the Work has anyway, and with eigenvectors
// zstedc's 2n² reals.
type lapackWork struct {
	dc     bool         // tridiagonal eigenpairs by zstedc (else zstemr)
	nb, kk int          // zhetrd's block size; columns kk… are reduced in panels
	panel  []complex128 // zlatrd's n×nb update
	rwork  []float64    // zstedc's (or zstemr's) workspace, then a copy of d and e
	iwork  []C.int
	isuppz []C.int
	work   []complex128 // zunmtr's workspace for a column block
}

// lapackSizes are the lengths of a LAPACK workspace.
type lapackSizes struct {
	dc                                bool // zstedc (else zstemr)
	nb, kk                            int
	panel, rwork, iwork, isuppz, work int
}

// queryLapackWork asks the stages for their workspace for n and the mode.
func queryLapackWork(n int, vectors bool) lapackSizes {
	q := lapackSizes{nb: int(C.mg_ilaenv(1, C.int(n)))}
	nx := n
	if q.nb > 1 && q.nb < n {
		nx = max(q.nb, int(C.mg_ilaenv(3, C.int(n))))
	}
	if nx >= n {
		q.nb, nx = 1, n
	}
	q.kk = n - (n-nx+q.nb-1)/q.nb*q.nb
	if q.kk < n {
		q.panel = n * q.nb
	}
	if !vectors {
		return q
	}
	var rq, dummy [1]float64
	var iq, idummy [2]C.int
	var one, wq, dq [1]complex128
	if q.dc = n < divideConquerMax; q.dc {
		C.mg_zstedc(C.int(n), cd(dummy[:]), cd(dummy[:]), cz(one[:]), cz(dq[:]), -1, cd(rq[:]), -1, &iq[0], -1)
	} else {
		C.mg_zstemr(C.int(n), cd(dummy[:]), cd(dummy[:]), cd(dummy[:]), cz(one[:]), ci(idummy[:]), cd(rq[:]), -1, &iq[0], -1)
		q.isuppz = 2 * n
	}
	q.rwork = max(int(rq[0]), 2*n) + 2*n
	q.iwork = max(int(iq[0]), 1)
	C.mg_zunmtr(C.int(n), C.int(min(n, lapackBlockCols)), cz(one[:]), cz(one[:]), cz(one[:]), cz(wq[:]), -1, 1)
	q.work = max(int(real(wq[0])), int(real(dq[0])), 1)
	return q
}

// newLapackWork allocates the workspace for n and the mode.
func newLapackWork(n int, vectors bool) *lapackWork {
	q := queryLapackWork(n, vectors)
	return &lapackWork{
		dc: q.dc, nb: q.nb, kk: q.kk,
		panel:  make([]complex128, q.panel),
		rwork:  make([]float64, q.rwork),
		iwork:  make([]C.int, q.iwork),
		isuppz: make([]C.int, q.isuppz),
		work:   make([]complex128, q.work),
	}
}

// lapackWorkBytes is the size of the workspace newLapackWork allocates.
func lapackWorkBytes(n int, vectors bool) int64 {
	q := queryLapackWork(n, vectors)
	return heapBytes(int64(unsafe.Sizeof(lapackWork{}))) + heapBytes(16*int64(q.panel)) +
		heapBytes(8*int64(q.rwork)) + heapBytes(4*int64(q.iwork)) +
		heapBytes(4*int64(q.isuppz)) + heapBytes(16*int64(q.work))
}

// cz and cd pass a Go slice to C (nil when empty).
func cz(s []complex128) *C.complexdouble {
	if len(s) == 0 {
		return nil
	}
	return (*C.complexdouble)(unsafe.Pointer(&s[0]))
}

func cd(s []float64) *C.double {
	if len(s) == 0 {
		return nil
	}
	return (*C.double)(unsafe.Pointer(&s[0]))
}

func ci(s []C.int) *C.int {
	if len(s) == 0 {
		return nil
	}
	return &s[0]
}

// lapackSolve diagonalises the matrix in w.a (lower triangle, row-major,
// already scaled; with vectors, conjugated) into w.d (ascending) and, with
// vectors, the eigenvectors into w.vecs, mode-major: the stages of LAPACK's
// zheevd (Hermitian reduction to tridiagonal form, zhetrd; the
// tridiagonal's eigenvalues by root-free QL, dsterf, or its eigenpairs by
// divide and conquer, zstedc, with implicit QL, zsteqr, should that fail;
// the reflectors applied to the eigenvectors, zunmtr), called one by one
// so that done is polled between zhetrd's panels and between column blocks
// of the back-transformation.
//
// The row-major lower triangle of a Hermitian matrix H is the
// column-major upper triangle of conj(H) = Hᵀ, which has the eigenvalues of
// H: so LAPACK is handed w.a as it is when only eigenvalues are asked. The
// eigenvectors of conj(H) are the conjugates of H's, so with vectors Solve
// conjugates the lower triangle first (in the pass that finds its largest
// element): LAPACK then reads H itself, and its eigenvectors, stored
// column-major, u_k in [k*n, (k+1)*n), are H's, already mode-major.
func (w *Work) lapackSolve(vectors bool) Status {
	lw := w.lapack[modeIndex(vectors)]
	if lw == nil {
		lw = newLapackWork(w.n, vectors)
		w.lapack[modeIndex(vectors)] = lw
	}
	w.threads = lapackThreads.enter(w.n, vectors)
	defer lapackThreads.leave(w.threads)
	if w.reduceLAPACK(lw) {
		return Stopped
	}
	n := C.int(w.n)
	if !vectors {
		if C.mg_dsterf(n, cd(w.d), cd(w.e)) != 0 {
			return NoConverge
		}
		return OK
	}
	if w.stopped() {
		return Stopped
	}
	if !w.tridiagonalPairs(lw) {
		return NoConverge
	}
	for j := 0; j < w.n; j += lapackBlockCols {
		if w.stopped() {
			return Stopped
		}
		cols := min(lapackBlockCols, w.n-j)
		if C.mg_zunmtr(n, C.int(cols), cz(w.a), cz(w.tau), cz(w.vecs[j*w.n:]), cz(lw.work), C.int(len(lw.work)), C.int(w.stageThreads())) != 0 {
			return NoConverge
		}
	}
	return OK
}

// reduceLAPACK is zhetrd on w.a, upper triangle (column-major), into w.d,
// w.e and w.tau (the reflectors stay in w.a): its blocked loop written out
// from LAPACK's zhetrd.f, a poll before each panel. True when stopped.
func (w *Work) reduceLAPACK(lw *lapackWork) bool {
	n, a, nb := w.n, w.a, lw.nb
	for k := n - nb; k >= lw.kk; k -= nb {
		if w.stopped() {
			return true
		}
		t3 := w.stageThreads()
		t2 := 1
		if wideLevel2 {
			t2 = t3
		}
		C.mg_panel(C.int(n), C.int(k+nb), C.int(nb), cz(a), cd(w.e), cz(w.tau), cz(lw.panel), C.int(t2), C.int(t3))
		// zlatrd left 1 in the superdiagonal of the panel's reflectors.
		for j := k; j < k+nb; j++ {
			a[j*n+j-1] = complex(w.e[j-1], 0)
			w.d[j] = real(a[j*n+j])
		}
	}
	if w.stopped() {
		return true
	}
	C.mg_zhetd2(C.int(n), C.int(lw.kk), cz(a), cd(w.d), cd(w.e), cz(w.tau))
	return false
}

// tridiagonalPairs finds all eigenpairs of the tridiagonal (w.d, w.e):
// eigenvalues into w.d, ascending, eigenvectors (real, as complex numbers)
// into w.vecs, column-major. zstedc (or zstemr, see divideConquerMax)
// first; should it fail (never seen; LAPACK's drivers then stop, or for
// zheevr fall back), zsteqr on a copy of the tridiagonal. False when both
// failed.
func (w *Work) tridiagonalPairs(lw *lapackWork) bool {
	n := w.n
	saved := lw.rwork[len(lw.rwork)-2*n:]
	copy(saved[:n], w.d)
	copy(saved[n:], w.e)
	rwork := lw.rwork[:len(lw.rwork)-2*n]
	if lw.dc {
		if C.mg_zstedc(C.int(n), cd(w.d), cd(w.e), cz(w.vecs), cz(lw.work), C.int(len(lw.work)),
			cd(rwork), C.int(len(rwork)), ci(lw.iwork), C.int(len(lw.iwork))) == 0 {
			return true
		}
	} else if C.mg_zstemr(C.int(n), cd(w.d), cd(w.e), cd(w.vals), cz(w.vecs), ci(lw.isuppz),
		cd(rwork), C.int(len(rwork)), ci(lw.iwork), C.int(len(lw.iwork))) == 0 {
		copy(w.d, w.vals)
		return true
	}
	copy(w.d, saved[:n])
	copy(w.e, saved[n:])
	return C.mg_zsteqr(C.int(n), cd(w.d), cd(w.e), cz(w.vecs), cd(rwork)) == 0
}

// zheevrWhole solves w.a by one call of LAPACK's zheevr, the driver whose
// stages lapackSolve calls one by one (benchmarks and tests compare them;
// it allocates its workspace): eigenvalues into w.d, conjugated
// eigenvectors into w.vecs. False when LAPACK reported a failure.
func (w *Work) zheevrWhole(vectors bool) bool {
	n := C.int(w.n)
	var wq [1]complex128
	var rq [1]float64
	var iq [1]C.int
	isuppz := make([]C.int, 2*w.n)
	z := w.vecs
	if !vectors {
		z = make([]complex128, 1)
	}
	C.mg_zheevr(cBool(vectors), n, cz(w.a), cd(w.d), cz(z), ci(isuppz), cz(wq[:]), -1, cd(rq[:]), -1, ci(iq[:]), -1)
	work := make([]complex128, max(int(real(wq[0])), 1))
	rwork := make([]float64, max(int(rq[0]), 1))
	iwork := make([]C.int, max(int(iq[0]), 1))
	w.threads = lapackThreads.enter(w.n, vectors)
	defer lapackThreads.leave(w.threads)
	if w.threads > 1 {
		C.openblas_set_num_threads(C.int(w.threads))
		defer C.openblas_set_num_threads(1)
	}
	return C.mg_zheevr(cBool(vectors), n, cz(w.a), cd(w.d), cz(z), ci(isuppz), cz(work), C.int(len(work)),
		cd(rwork), C.int(len(rwork)), ci(iwork), C.int(len(iwork))) == 0
}

func cBool(b bool) C.int {
	if b {
		return 1
	}
	return 0
}

// threadPolicy decides how many OpenBLAS threads a call may use. The
// engine parallelises over q-points itself, so a call normally runs on one
// thread (set once at start-up), and calls from several goroutines run side
// by side. A large solve that finds no other LAPACK call in flight and
// cores with nothing else to run may widen to those cores for its
// duration: it holds mu exclusively while the thread count is raised, so
// no narrow call ever runs with it (OpenBLAS's thread count is
// process-wide), and a narrow call arriving meanwhile waits for it instead
// of oversubscribing the cores. TryLock never queues a writer, so narrow
// calls are never starved.
//
// A wide call uses only cores the Go scheduler reports idle, and asks
// again before each stage (each panel of the reduction, each column block
// of the back-transformation; stageThreads): OpenBLAS's threads meet after
// every matrix–vector product (32 to a panel), and a thread that has to
// wait for its core at each meeting slows the call down many times over.
// Measured on this machine with one goroutine spinning beside a call on
// two threads (two cores, loaded by other work): the reduction and
// tridiagonal stage of n = 768 took 4.7 s with every stage on two threads,
// 0.79 s with only the matrix–matrix stages on two (0.50 and 0.64 s
// without the spinning goroutine), and 214 against 15 ms at n = 192. A
// goroutine that starts running during a wide call thus costs it at most
// one panel on two threads. Other processes on the same cores are not
// seen: where the cores are shared, OPENBLAS_NUM_THREADS=1 keeps every
// call on one thread.
type threadPolicy struct {
	mu         sync.RWMutex
	maxThreads int // from OPENBLAS_NUM_THREADS (if set) and the CPUs OpenBLAS sees
	once       sync.Once
	sched      []metrics.Sample // running and runnable goroutines
}

var lapackThreads threadPolicy

// init sets OpenBLAS to one thread and records the most a wide call may
// use: OpenBLAS's count of available CPUs, capped by OPENBLAS_NUM_THREADS
// when the operator set it (OPENBLAS_NUM_THREADS=1 disables wide calls).
func (p *threadPolicy) init() {
	p.maxThreads = int(C.openblas_get_num_procs())
	if v, err := strconv.Atoi(os.Getenv("OPENBLAS_NUM_THREADS")); err == nil && v >= 1 {
		p.maxThreads = min(p.maxThreads, v)
	}
	p.maxThreads = max(p.maxThreads, 1)
	p.sched = []metrics.Sample{{Name: "/sched/goroutines/running:goroutines"}, {Name: "/sched/goroutines/runnable:goroutines"}}
	C.openblas_set_num_threads(1)
}

// enter takes the policy's lock for a call of size n and returns the
// number of threads the call runs on (1 for a shared call).
func (p *threadPolicy) enter(n int, vectors bool) int {
	p.once.Do(p.init)
	if k := min(p.maxThreads, runtime.GOMAXPROCS(0)); k > 1 && n >= wideMin[modeIndex(vectors)] && p.mu.TryLock() {
		if k = min(k, 1+p.idleProcs()); k > 1 {
			return k
		}
		p.mu.Unlock()
	}
	p.mu.RLock()
	return 1
}

// idleProcs is the number of Go processors with no goroutine to run
// besides the caller (running counts it), from the scheduler's metrics
// (a few µs to read). Called with mu held, since p.sched is shared.
func (p *threadPolicy) idleProcs() int {
	metrics.Read(p.sched)
	var busy uint64
	for _, s := range p.sched {
		if s.Value.Kind() == metrics.KindUint64 {
			busy += s.Value.Uint64()
		}
	}
	return max(runtime.GOMAXPROCS(0)-int(busy), 0)
}

// leave releases what enter took.
func (p *threadPolicy) leave(threads int) {
	if threads > 1 {
		p.mu.Unlock()
		return
	}
	p.mu.RUnlock()
}

// stageThreads is the number of OpenBLAS threads the next stage of a
// call runs on: 1 for a shared call; for a wide one, as many of its
// threads as the Go scheduler reports idle cores for now (a goroutine that
// started running since the call began takes its core back at the next
// panel or column block).
func (w *Work) stageThreads() int {
	if w.threads <= 1 {
		return 1
	}
	return min(w.threads, 1+lapackThreads.idleProcs())
}

// wideLevel2 makes the stages of a wide call that are matrix–vector
// products (zlatrd's, 32 to a panel) run on several threads too; false
// keeps them on one, threading only the matrix–matrix stages (zher2k,
// zunmtr). A variable for BenchmarkLAPACKCrossover.
var wideLevel2 = true

// backendName names the linked solver.
func backendName() string { return "lapack" }

// backendDetail is OpenBLAS's own build description (version, target).
func backendDetail() string { return C.GoString(C.openblas_get_config()) }

// openblasThreads is OpenBLAS's current thread count (tests).
func openblasThreads() int { return int(C.openblas_get_num_threads()) }
