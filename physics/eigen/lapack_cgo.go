//go:build lapack && cgo

// The LAPACK path of the solver (build tag lapack): zheevd of the system's
// OpenBLAS, for matrices from a measured crossover size up (dispatch.go).
// Build: CGO_ENABLED=1 go build -tags lapack, with libopenblas-dev
// installed (Debian/Ubuntu; the runtime needs libopenblas0).

package eigen

/*
#cgo LDFLAGS: -lopenblas
#include <complex.h>
#include <stddef.h>

// LAPACK (Fortran, LP64: INTEGER is a C int; the hidden lengths of the
// CHARACTER arguments are size_t at the end, as gfortran passes them).
void zheevd_(const char *jobz, const char *uplo, const int *n,
	double complex *a, const int *lda, double *w,
	double complex *work, const int *lwork, double *rwork, const int *lrwork,
	int *iwork, const int *liwork, int *info, size_t, size_t);

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

// mg_zheevd calls zheevd on the upper triangle (column-major) of the n×n
// matrix a; lwork = -1 asks for the workspace sizes instead.
static int mg_zheevd(int vectors, int n, double complex *a, double *w,
	double complex *work, int lwork, double *rwork, int lrwork,
	int *iwork, int liwork) {
	char jobz = vectors ? 'V' : 'N', uplo = 'U';
	int info = 0;
	zheevd_(&jobz, &uplo, &n, a, &n, w, work, &lwork, rwork, &lrwork,
		iwork, &liwork, &info, 1, 1);
	return info;
}
// mg_zheevr calls zheevr (all eigenvalues) on the upper triangle
// (column-major) of the n×n matrix a, eigenvectors into z; lwork = -1 asks
// for the workspace sizes instead.
static int mg_zheevr(int vectors, int n, double complex *a, double *w,
	double complex *z, int *isuppz,
	double complex *work, int lwork, double *rwork, int lrwork,
	int *iwork, int liwork) {
	char jobz = vectors ? 'V' : 'N', range = 'A', uplo = 'U';
	int info = 0, m = 0, il = 1, iu = n, ldz = n > 0 ? n : 1;
	double vl = 0, vu = 0, abstol = 0;
	zheevr_(&jobz, &range, &uplo, &n, a, &n, &vl, &vu, &il, &iu, &abstol,
		&m, w, z, &ldz, isuppz, work, &lwork, rwork, &lrwork,
		iwork, &liwork, &info, 1, 1, 1);
	return info;
}
*/
import "C"

import (
	"os"
	"runtime"
	"strconv"
	"sync"
	"unsafe"
)

// lapackLinked: this build has the LAPACK path.
const lapackLinked = true

// lapackWork is the LAPACK workspace of one Work and mode (values or
// vectors), sized once by the driver's workspace query.
type lapackWork struct {
	evr    bool // zheevr (else zheevd)
	work   []complex128
	rwork  []float64
	iwork  []C.int
	isuppz []C.int
}

// useEVR selects the driver per mode (values, vectors): zheevr, or zheevd
// when false. BenchmarkLAPACKDrivers measured them on this machine at the
// ladder's sizes, one core: equal within 5 % for eigenvalues (both reduce
// to the same tridiagonal and call the same root-free QL), and for
// eigenvectors zheevr 0–5 % faster from n = 96 up (205 against 217 ms at
// n = 768) while its workspace is O(n) instead of zheevd's 2n² complex and
// 2n² real, and it writes the eigenvectors straight into Work.vecs. SciPy's
// eigh uses the same driver by default; numpy's uses zheevd.
var useEVR = [2]bool{true, true}

// newLapackWork allocates the driver's optimal workspace for n and the
// mode.
func newLapackWork(n int, vectors bool) *lapackWork {
	q := queryLapackWork(n, vectors)
	return &lapackWork{
		evr:    q.evr,
		work:   make([]complex128, q.work),
		rwork:  make([]float64, q.rwork),
		iwork:  make([]C.int, q.iwork),
		isuppz: make([]C.int, q.isuppz),
	}
}

// lapackSizes are the lengths of a LAPACK workspace.
type lapackSizes struct {
	evr                        bool
	work, rwork, iwork, isuppz int
}

// queryLapackWork asks the driver for its optimal workspace for n and the
// mode.
func queryLapackWork(n int, vectors bool) lapackSizes {
	var wq C.complexdouble
	var rq C.double
	var iq C.int
	var a, z [1]complex128
	var vals [1]float64
	var isuppz [2]C.int
	evr := useEVR[modeIndex(vectors)]
	if evr {
		C.mg_zheevr(cBool(vectors), C.int(n), cz(a[:]), cd(vals[:]), cz(z[:]), &isuppz[0],
			&wq, -1, &rq, -1, &iq, -1)
	} else {
		C.mg_zheevd(cBool(vectors), C.int(n), cz(a[:]), cd(vals[:]), &wq, -1, &rq, -1, &iq, -1)
	}
	q := lapackSizes{
		evr:   evr,
		work:  max(int(real(complex128(wq))), 1),
		rwork: max(int(rq), 1),
		iwork: max(int(iq), 1),
	}
	if evr {
		q.isuppz = max(2*n, 1)
	}
	return q
}

// lapackWorkBytes is the size of the workspace newLapackWork allocates.
func lapackWorkBytes(n int, vectors bool) int64 {
	lw := queryLapackWork(n, vectors)
	return heapBytes(16*int64(lw.work)) + heapBytes(8*int64(lw.rwork)) +
		heapBytes(4*int64(lw.iwork)) + heapBytes(4*int64(lw.isuppz))
}

func cz(s []complex128) *C.complexdouble { return (*C.complexdouble)(unsafe.Pointer(&s[0])) }
func cd(s []float64) *C.double           { return (*C.double)(unsafe.Pointer(&s[0])) }

func cBool(b bool) C.int {
	if b {
		return 1
	}
	return 0
}

// lapackSolve diagonalises the matrix in w.a (lower triangle, row-major,
// already scaled) into w.d (ascending) and, with vectors, the conjugated
// eigenvectors into w.vecs, mode-major. Row-major lower triangle of H is
// the column-major upper triangle of conj(H) = Hᵀ: the eigenvalues are
// those of H, and each eigenvector u of conj(H) is conj(x) for the
// eigenvector x of H; stored column-major, u_k occupies [k*n, (k+1)*n),
// already mode-major. It returns false when LAPACK reported a failure.
func (w *Work) lapackSolve(vectors bool) bool {
	lw := w.lapack[modeIndex(vectors)]
	if lw == nil {
		lw = newLapackWork(w.n, vectors)
		w.lapack[modeIndex(vectors)] = lw
	}
	threads := lapackThreads.enter(w.n, vectors)
	w.threads = threads
	var info C.int
	if lw.evr {
		z := w.a // unused without vectors
		if vectors {
			z = w.vecs
		}
		info = C.mg_zheevr(cBool(vectors), C.int(w.n), cz(w.a), cd(w.d), cz(z), &lw.isuppz[0],
			cz(lw.work), C.int(len(lw.work)), cd(lw.rwork), C.int(len(lw.rwork)),
			&lw.iwork[0], C.int(len(lw.iwork)))
	} else {
		info = C.mg_zheevd(cBool(vectors), C.int(w.n), cz(w.a), cd(w.d),
			cz(lw.work), C.int(len(lw.work)), cd(lw.rwork), C.int(len(lw.rwork)),
			&lw.iwork[0], C.int(len(lw.iwork)))
		if vectors && info == 0 {
			copy(w.vecs, w.a)
		}
	}
	lapackThreads.leave(threads)
	return info == 0
}

// threadPolicy decides how many OpenBLAS threads a call may use. The
// engine parallelises over q-points itself, so a call normally runs on one
// thread (set once at start-up), and calls from several goroutines run side
// by side. A large solve that finds no other LAPACK call in flight may
// widen to maxThreads for its duration: it holds mu exclusively while the
// thread count is raised, so no narrow call ever runs with it (OpenBLAS's
// thread count is process-wide), and a narrow call arriving meanwhile
// waits for it instead of oversubscribing the cores. TryLock never queues
// a writer, so narrow calls are never starved.
type threadPolicy struct {
	mu         sync.RWMutex
	maxThreads int // from OPENBLAS_NUM_THREADS (if set) and the CPUs OpenBLAS sees
	once       sync.Once
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
	C.openblas_set_num_threads(1)
}

// enter takes the policy's lock for a call of size n and returns the
// number of threads the call runs on (1 for a shared call).
func (p *threadPolicy) enter(n int, vectors bool) int {
	p.once.Do(p.init)
	if k := min(p.maxThreads, runtime.GOMAXPROCS(0)); k > 1 && n >= wideMin[modeIndex(vectors)] && p.mu.TryLock() {
		C.openblas_set_num_threads(C.int(k))
		return k
	}
	p.mu.RLock()
	return 1
}

// leave releases what enter took.
func (p *threadPolicy) leave(threads int) {
	if threads > 1 {
		C.openblas_set_num_threads(1)
		p.mu.Unlock()
		return
	}
	p.mu.RUnlock()
}

// backendName names the linked solver.
func backendName() string { return "lapack" }

// backendDetail is OpenBLAS's own build description (version, target).
func backendDetail() string { return C.GoString(C.openblas_get_config()) }

// openblasThreads is OpenBLAS's current thread count (tests).
func openblasThreads() int { return int(C.openblas_get_num_threads()) }
