// The size ladder of the solver: both paths on the sizes a crystal of 2 to
// 256 sites gives, beside the LAPACK reference of testdata/ladder_numpy.py
// (DEVELOPERS.md, "Measured: eigensolver size ladder").

package eigen

import (
	"fmt"
	"math/rand/v2"
	"syscall"
	"testing"
	"time"
)

// cpuTime is the CPU time the process has used (user and system).
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// ladderSizes are the matrix sizes of the ladder: n = 3 × sites for 2, 8,
// 32, 64, 128 and 256 sites.
var ladderSizes = []int{6, 24, 96, 192, 384, 768}

// BenchmarkHermitianLadder times one Solve (the matrix copied into the
// workspace first, as the engine assembles into it) per size, mode and
// path: "go" is the pure-Go Householder + QL, "lapack" the LAPACK path of
// a lapack build (skipped in other builds), "auto" what Solve picks. It
// reports the process's CPU time per solve too (cpu-ns/op: all threads,
// so above the wall time of a call on several threads, and less disturbed
// than the wall time by other work on a shared machine).
func BenchmarkHermitianLadder(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, n := range ladderSizes {
		h := randomHermitian(rng, n)
		for _, vectors := range []bool{false, true} {
			kind := "values"
			if vectors {
				kind = "vectors"
			}
			for _, r := range []struct {
				name  string
				route route
			}{{"go", routeGo}, {"lapack", routeLAPACK}, {"auto", routeAuto}} {
				b.Run(fmt.Sprintf("%s/n=%d/%s", kind, n, r.name), func(b *testing.B) {
					if r.route == routeLAPACK && !lapackLinked {
						b.Skip("not a lapack build")
					}
					benchSolves(b, h, n, r.route, vectors)
				})
			}
		}
	}
}

// benchSolves times solves of the n×n matrix h on route r, the matrix
// copied in before each: the workspace is made by one solve outside the
// timing, and the CPU time per solve (all threads) is reported beside the
// wall time.
func benchSolves(b *testing.B, h []complex128, n int, r route, vectors bool) {
	w := NewWork(n)
	w.route = r
	copy(w.a, h)
	w.Solve(vectors)
	b.ReportAllocs()
	cpu0 := cpuTime()
	for b.Loop() {
		copy(w.a, h)
		if st := w.Solve(vectors); st != OK {
			b.Fatalf("status %v", st)
		}
	}
	b.ReportMetric(float64(cpuTime()-cpu0)/float64(b.N), "cpu-ns/op")
	sinkVals = w.vals
}
