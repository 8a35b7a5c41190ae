//go:build lapack && cgo

// Tests and benchmarks of the LAPACK path only (lapack builds).

package eigen

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"runtime/metrics"
	"sync"
	"sync/atomic"
	"testing"
)

// TestStagesMatchDriver: the LAPACK path, zheevr's stages called one by
// one with polls between them, gives what one call of zheevr gives, to
// 1e-12 ‖H‖_F in the eigenvalues and by the eigenvectors' residuals (the
// same operations in the same order: the two agree to the last bit on one
// thread, but a wide call may round differently). Sizes on both sides of
// zhetrd's crossover to its blocked loop and of the back-transformation's
// column blocks.
func TestStagesMatchDriver(t *testing.T) {
	rng := rand.New(rand.NewPCG(13, 5))
	for _, n := range []int{2, 3, 31, 32, 33, 64, 65, 200, 257, 300} {
		h := randomHermitian(rng, n)
		tol := 1e-12 * frobenius(h)
		for _, vectors := range []bool{false, true} {
			staged, vecs := solveRoute(t, h, n, routeLAPACK, vectors)
			w := NewWork(n)
			copy(w.a, h)
			if vectors {
				w.vecs = make([]complex128, n*n)
			}
			if !w.zheevrWhole(vectors) {
				t.Fatalf("n=%d: zheevr failed", n)
			}
			for k := range staged {
				if d := math.Abs(staged[k] - w.d[k]); d > tol {
					t.Fatalf("n=%d vectors=%v: λ%d = %.17g staged, %.17g by zheevr", n, vectors, k, staged[k], w.d[k])
				}
			}
			if vectors {
				checkEigenpairs(t, h, n, staged, vecs, 1e-12)
			}
		}
	}
}

// BenchmarkLAPACKDrivers measures, on the same matrices, the LAPACK path
// (zheevr's stages one by one), one call of zheevr, and the pure-Go path
// for reference.
func BenchmarkLAPACKDrivers(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, n := range ladderSizes[2:] {
		h := randomHermitian(rng, n)
		for _, vectors := range []bool{false, true} {
			kind := "values"
			if vectors {
				kind = "vectors"
			}
			w := NewWork(n)
			w.route = routeLAPACK
			w.vecs = make([]complex128, n*n)
			b.Run(fmt.Sprintf("%s/n=%d/staged", kind, n), func(b *testing.B) {
				for b.Loop() {
					copy(w.a, h)
					if st := w.Solve(vectors); st != OK {
						b.Fatalf("status %v", st)
					}
				}
			})
			b.Run(fmt.Sprintf("%s/n=%d/zheevr", kind, n), func(b *testing.B) {
				for b.Loop() {
					copy(w.a, h)
					if !w.zheevrWhole(vectors) {
						b.Fatal("zheevr failed")
					}
				}
			})
		}
	}
}

// BenchmarkLAPACKCrossover times both paths around the sizes where LAPACK
// overtakes the pure-Go solver (lapackMin), and the LAPACK path with one
// and with several OpenBLAS threads where several start to pay (wideMin):
// on every stage (wide, what a wide call does), or on the matrix–matrix
// stages only (wide-level3).
func BenchmarkLAPACKCrossover(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, n := range []int{24, 32, 40, 48, 56, 64, 80, 96, 128, 192, 256, 384, 512, 768} {
		h := randomHermitian(rng, n)
		for _, vectors := range []bool{false, true} {
			kind := "values"
			if vectors {
				kind = "vectors"
			}
			for _, c := range []struct {
				name   string
				route  route
				wide   int
				level2 bool
			}{{"go", routeGo, 1 << 30, false}, {"lapack-1", routeLAPACK, 1 << 30, false},
				{"lapack-wide-level3", routeLAPACK, 0, false}, {"lapack-wide", routeLAPACK, 0, true}} {
				if c.route == routeGo && n > 96 || c.wide == 0 && n < 96 {
					continue
				}
				b.Run(fmt.Sprintf("%s/n=%d/%s", kind, n, c.name), func(b *testing.B) {
					saved, savedL2 := wideMin, wideLevel2
					defer func() { wideMin, wideLevel2 = saved, savedL2 }()
					wideMin, wideLevel2 = [2]int{c.wide, c.wide}, c.level2
					benchSolves(b, h, n, c.route, vectors)
				})
			}
		}
	}
}

// TestWideCallRestoresThreads: a lone large call with idle cores beside
// it runs on several OpenBLAS threads (in one of a few tries: a runtime
// goroutine may be busy at the moment one looks), and leaves OpenBLAS on
// one thread after it, so that calls from the engine's workers do not
// oversubscribe the cores.
func TestWideCallRestoresThreads(t *testing.T) {
	lapackThreads.once.Do(lapackThreads.init)
	want := min(lapackThreads.maxThreads, runtime.GOMAXPROCS(0))
	if want < 2 {
		t.Skip("one core or OPENBLAS_NUM_THREADS=1: no wide calls")
	}
	rng := rand.New(rand.NewPCG(7, 7))
	n := wideMin[1]
	w := NewWork(n)
	h := randomHermitian(rng, n)
	wide := false
	for try := 0; try < 5 && !wide; try++ {
		copy(w.a, h)
		if st := w.Solve(true); st != OK {
			t.Fatalf("status %v", st)
		}
		wide = w.threads == want
		if got := openblasThreads(); got != 1 {
			t.Errorf("OpenBLAS runs %d threads after a call; want 1", got)
		}
	}
	if !wide {
		t.Errorf("a lone call of n=%d ran on %d threads; want %d", n, w.threads, want)
	}
}

// TestNoWideCallOnBusyCores: while goroutines keep every other core busy,
// a large call stays on one thread.
func TestNoWideCallOnBusyCores(t *testing.T) {
	procs := runtime.GOMAXPROCS(0)
	if procs < 2 {
		t.Skip("one core: no wide calls")
	}
	var stop atomic.Bool
	var wg sync.WaitGroup
	defer func() { stop.Store(true); wg.Wait() }()
	for g := 0; g < procs-1; g++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for !stop.Load() {
			}
		}()
	}
	// Until the scheduler reports the spinners running.
	s := []metrics.Sample{{Name: "/sched/goroutines/running:goroutines"}}
	for metrics.Read(s); s[0].Value.Uint64() < uint64(procs); metrics.Read(s) {
		runtime.Gosched()
	}
	rng := rand.New(rand.NewPCG(7, 8))
	n := wideMin[1]
	w := NewWork(n)
	copy(w.a, randomHermitian(rng, n))
	if st := w.Solve(true); st != OK {
		t.Fatalf("status %v", st)
	}
	if w.threads != 1 {
		t.Errorf("a call beside %d busy goroutines ran on %d threads; want 1", procs-1, w.threads)
	}
}

// BenchmarkTridiagonalStage compares, with eigenvectors, the LAPACK path
// with the tridiagonal eigenpairs by divide and conquer (zstedc, zheevd's
// choice) and by relatively robust representations (zstemr, zheevr's), to
// set divideConquerMax.
func BenchmarkTridiagonalStage(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, n := range []int{40, 64, 96, 128, 192, 256, 384, 768, 1536} {
		h := randomHermitian(rng, n)
		for _, dc := range []bool{true, false} {
			name := "zstemr"
			if dc {
				name = "zstedc"
			}
			b.Run(fmt.Sprintf("n=%d/%s", n, name), func(b *testing.B) {
				saved := divideConquerMax
				defer func() { divideConquerMax = saved }()
				divideConquerMax = 0
				if dc {
					divideConquerMax = n + 1
				}
				benchSolves(b, h, n, routeLAPACK, true)
			})
		}
	}
}
