//go:build lapack && cgo

// Tests and benchmarks of the LAPACK path only (lapack builds).

package eigen

import (
	"fmt"
	"math/rand/v2"
	"runtime"
	"testing"
)

// BenchmarkLAPACKDrivers measures the two LAPACK drivers for all
// eigenvalues of a Hermitian matrix on the same matrices: zheevd
// (tridiagonal stage by divide and conquer) and zheevr (by relatively
// robust representations), to choose between them.
func BenchmarkLAPACKDrivers(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, n := range ladderSizes {
		h := randomHermitian(rng, n)
		for _, vectors := range []bool{false, true} {
			kind := "values"
			if vectors {
				kind = "vectors"
			}
			for _, evr := range []bool{false, true} {
				name := "zheevd"
				if evr {
					name = "zheevr"
				}
				b.Run(fmt.Sprintf("%s/n=%d/%s", kind, n, name), func(b *testing.B) {
					saved := useEVR
					defer func() { useEVR = saved }()
					useEVR[modeIndex(vectors)] = evr
					w := NewWork(n)
					w.route = routeLAPACK
					for b.Loop() {
						copy(w.a, h)
						if st := w.Solve(vectors); st != OK {
							b.Fatalf("status %v", st)
						}
					}
					sinkVals = w.vals
				})
			}
		}
	}
}

// BenchmarkLAPACKCrossover times both paths around the sizes where LAPACK
// overtakes the pure-Go solver (lapackMin), and the LAPACK path with one
// and with two OpenBLAS threads where two start to pay (wideMin).
func BenchmarkLAPACKCrossover(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, n := range []int{24, 32, 40, 48, 56, 64, 80, 96, 128, 192, 256, 384, 768} {
		h := randomHermitian(rng, n)
		for _, vectors := range []bool{false, true} {
			kind := "values"
			if vectors {
				kind = "vectors"
			}
			for _, c := range []struct {
				name  string
				route route
				wide  int
			}{{"go", routeGo, 1 << 30}, {"lapack-1", routeLAPACK, 1 << 30}, {"lapack-wide", routeLAPACK, 0}} {
				if c.route == routeGo && n > 96 {
					continue
				}
				b.Run(fmt.Sprintf("%s/n=%d/%s", kind, n, c.name), func(b *testing.B) {
					saved := wideMin
					defer func() { wideMin = saved }()
					wideMin = [2]int{c.wide, c.wide}
					w := NewWork(n)
					w.route = c.route
					copy(w.a, h)
					w.Solve(vectors)
					for b.Loop() {
						copy(w.a, h)
						if st := w.Solve(vectors); st != OK {
							b.Fatalf("status %v", st)
						}
					}
					sinkVals = w.vals
				})
			}
		}
	}
}

// TestWideCallRestoresThreads: a lone large call may run on several
// OpenBLAS threads, and leaves OpenBLAS on one thread after it, so that
// calls from the engine's workers do not oversubscribe the cores.
func TestWideCallRestoresThreads(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	n := wideMin[1]
	w := NewWork(n)
	copy(w.a, randomHermitian(rng, n))
	if st := w.Solve(true); st != OK {
		t.Fatalf("status %v", st)
	}
	if want := min(lapackThreads.maxThreads, runtime.GOMAXPROCS(0)); w.threads != want {
		t.Errorf("a lone call of n=%d ran on %d threads; want %d", n, w.threads, want)
	}
	if got := openblasThreads(); got != 1 {
		t.Errorf("OpenBLAS runs %d threads after a call; want 1", got)
	}
}
