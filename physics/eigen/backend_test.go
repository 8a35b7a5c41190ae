// Tests that hold for both builds: each path the build has (pure Go always,
// LAPACK in lapack builds) against gonum's real embedding and against each
// other, across the crossover sizes.

package eigen

import (
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"runtime"
	"testing"
	"time"
)

// routes are the paths this build can take, by name.
func routes() []struct {
	name  string
	route route
} {
	rs := []struct {
		name  string
		route route
	}{{"go", routeGo}, {"auto", routeAuto}}
	if lapackLinked {
		rs = append(rs, struct {
			name  string
			route route
		}{"lapack", routeLAPACK})
	}
	return rs
}

// solveRoute solves a copy of h on the given path and returns fresh copies
// of the results.
func solveRoute(t *testing.T, h []complex128, n int, r route, vectors bool) ([]float64, []complex128) {
	t.Helper()
	w := NewWork(n)
	w.route = r
	copy(w.a, h)
	if st := w.Solve(vectors); st != OK {
		t.Fatalf("status %v", st)
	}
	vals := append([]float64(nil), w.Values()...)
	var vecs []complex128
	if vectors {
		vecs = append([]complex128(nil), w.Vectors()...)
	}
	return vals, vecs
}

// frobenius is ‖H‖_F of a full-storage matrix.
func frobenius(h []complex128) float64 {
	var s float64
	for _, z := range h {
		s += real(z)*real(z) + imag(z)*imag(z)
	}
	return math.Sqrt(s)
}

// TestBackendsAgree checks every path of the build at sizes on both sides
// of the crossovers (lapackMin: 40 and 64 modes) and at two ladder sizes:
// eigenvalues against gonum's embedding and between paths to 1e-12 ‖H‖_F
// (both are backward stable, so each eigenvalue is within a few ε‖H‖ of
// the exact one: Golub & Van Loan, Matrix Computations, 4th ed., §8.1.2,
// Weyl's bound; ε‖H‖ ≈ 2e-16 ‖H‖), and the eigenvectors by their residual
// ‖Hx − λx‖ and orthonormality to 1e-12 (definition of an orthonormal
// eigenbasis; common practice). The matrix's strict upper triangle is
// filled with garbage before each solve: no path may read it.
func TestBackendsAgree(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 4))
	type tc struct {
		name string
		h    []complex128
		n    int
	}
	var cases []tc
	for _, n := range []int{39, 40, 41, 63, 64, 65, 96, 150} {
		cases = append(cases, tc{fmt.Sprintf("random n=%d", n), randomHermitian(rng, n), n})
	}
	// A degenerate spectrum at a size LAPACK takes: threefold levels, as
	// the acoustic branches at Γ and the modes of a cubic crystal have.
	lambda := make([]float64, 66)
	for k := range lambda {
		lambda[k] = float64(k / 3)
	}
	cases = append(cases, tc{"threefold levels n=66", withSpectrum(rng, lambda), 66})
	// Real symmetric input (the long-wave set-up of cancel.go relies on
	// real eigenvectors for it).
	hr := randomHermitian(rng, 70)
	for k := range hr {
		hr[k] = complex(real(hr[k]), 0)
	}
	for i := 0; i < 70; i++ {
		for j := 0; j < i; j++ {
			hr[j*70+i] = hr[i*70+j]
		}
	}
	cases = append(cases, tc{"real symmetric n=70", hr, 70})
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			want, _ := Embedded(c.h, c.n, false)
			tol := 1e-12 * frobenius(c.h)
			garbage := append([]complex128(nil), c.h...)
			for i := 0; i < c.n; i++ {
				for j := i + 1; j < c.n; j++ {
					garbage[i*c.n+j] = complex(math.Inf(1), math.NaN())
				}
			}
			var ref []float64
			for _, r := range routes() {
				for _, vectors := range []bool{false, true} {
					vals, vecs := solveRoute(t, garbage, c.n, r.route, vectors)
					for k := range want {
						if d := math.Abs(vals[k] - want[k]); d > tol {
							t.Fatalf("%s vectors=%v: λ%d = %.17g; gonum %.17g (|Δ| = %.2g > %.2g)", r.name, vectors, k, vals[k], want[k], d, tol)
						}
						if ref != nil {
							if d := math.Abs(vals[k] - ref[k]); d > tol {
								t.Fatalf("%s vectors=%v: λ%d = %.17g; go path %.17g", r.name, vectors, k, vals[k], ref[k])
							}
						}
					}
					if ref == nil {
						ref = vals
					}
					if vectors {
						checkEigenpairs(t, c.h, c.n, vals, vecs, 1e-12)
					}
				}
			}
		})
	}
}

// TestRealInputRealVectors: a real symmetric matrix gets real eigenvectors
// (imaginary parts exactly zero) on every path, which the long-wave set-up
// of the core package reads as real.
func TestRealInputRealVectors(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 1))
	for _, n := range []int{12, 80} {
		h := randomHermitian(rng, n)
		for k := range h {
			h[k] = complex(real(h[k]), 0)
		}
		for _, r := range routes() {
			_, vecs := solveRoute(t, h, n, r.route, true)
			for k, z := range vecs {
				if imag(z) != 0 {
					t.Fatalf("n=%d %s: component %d = %v; want a real vector", n, r.name, k, z)
				}
			}
		}
	}
}

// TestNonFinite: a NaN or infinite element gives NaN eigenvalues (and
// vectors) on every path without reaching LAPACK, whose behaviour on such
// input is undefined.
func TestNonFinite(t *testing.T) {
	for _, n := range []int{5, 100} {
		for _, bad := range []complex128{cmplx.NaN(), cmplx.Inf(), complex(0, math.Inf(-1))} {
			h := make([]complex128, n*n)
			for i := 0; i < n; i++ {
				h[i*n+i] = 1
			}
			h[(n-1)*n+n/2] = bad
			for _, r := range routes() {
				for _, vectors := range []bool{false, true} {
					vals, vecs := solveRoute(t, h, n, r.route, vectors)
					for k, v := range vals {
						if !math.IsNaN(v) {
							t.Fatalf("n=%d %v %s: λ%d = %v; want NaN", n, bad, r.name, k, v)
						}
					}
					for k, z := range vecs {
						if !cmplx.IsNaN(z) {
							t.Fatalf("n=%d %v %s: vector component %d = %v; want NaN", n, bad, r.name, k, z)
						}
					}
				}
			}
		}
	}
}

// TestWorkReuseLarge: at sizes each path takes, one workspace solves
// matrices in turn, both modes interleaved, with the results of a fresh
// workspace and no allocation after its first solve of each mode.
func TestWorkReuseLarge(t *testing.T) {
	rng := rand.New(rand.NewPCG(6, 6))
	const n = 100
	mats := [][]complex128{randomHermitian(rng, n), randomHermitian(rng, n)}
	for _, r := range routes() {
		t.Run(r.name, func(t *testing.T) {
			w := NewWork(n)
			w.route = r.route
			for i := 0; i < 4; i++ {
				h, vectors := mats[i%2], i/2 == 1
				copy(w.a, h)
				if st := w.Solve(vectors); st != OK {
					t.Fatalf("status %v", st)
				}
				want, _ := solveRoute(t, h, n, r.route, vectors)
				for k := range want {
					if w.vals[k] != want[k] {
						t.Fatalf("solve %d: λ%d = %v; fresh workspace %v", i, k, w.vals[k], want[k])
					}
				}
			}
			for _, vectors := range []bool{false, true} {
				allocs := testing.AllocsPerRun(5, func() {
					copy(w.a, mats[0])
					w.Solve(vectors)
				})
				if allocs != 0 {
					t.Errorf("vectors=%v: %v allocations per solve; want 0", vectors, allocs)
				}
			}
		})
	}
}

// TestStopBeforeLAPACK: a closed stop channel is seen before a solve of
// any path starts its O(n³) work.
func TestStopBeforeLAPACK(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 9))
	n := 2 * lapackMin[1]
	h := randomHermitian(rng, n)
	done := make(chan struct{})
	close(done)
	for _, r := range routes() {
		for _, vectors := range []bool{false, true} {
			w := NewWork(n)
			w.route = r.route
			w.SetStop(done)
			copy(w.a, h)
			if st := w.Solve(vectors); st != Stopped {
				t.Errorf("%s vectors=%v: status %v; want Stopped", r.name, vectors, st)
			}
		}
	}
}

// TestBackendName: Backend says which solver the build linked.
func TestBackendName(t *testing.T) {
	want := "go"
	if lapackLinked {
		want = "lapack"
	}
	if got := Backend(); got != want {
		t.Errorf("Backend() = %q; want %q", got, want)
	}
	if lapackLinked && BackendDetail() == "" {
		t.Error("BackendDetail() is empty in a lapack build")
	}
}

// TestWorkspaceBytes: WorkspaceBytes bounds what a Work allocates up to
// the end of its first solve (measured by the heap's allocation counter,
// the least of three tries: the runtime itself allocates now and then, for
// a thread taking over from one blocked in a cgo call for example) from
// above, by at most a quarter (and half a KiB, for the size classes of
// the smallest matrices), on both sides of the crossovers.
func TestWorkspaceBytes(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	for _, n := range []int{6, 24, 39, 40, 63, 64, 100, 200} {
		h := randomHermitian(rng, n)
		for _, vectors := range []bool{false, true} {
			got := int64(math.MaxInt64)
			for try := 0; try < 3; try++ {
				var before, after runtime.MemStats
				runtime.ReadMemStats(&before)
				w := NewWork(n)
				copy(w.a, h)
				st := w.Solve(vectors)
				runtime.ReadMemStats(&after)
				if st != OK {
					t.Fatalf("status %v", st)
				}
				got = min(got, int64(after.TotalAlloc-before.TotalAlloc))
			}
			est := WorkspaceBytes(n, vectors)
			if est < got || float64(est) > 1.25*float64(got)+512 {
				t.Errorf("n=%d vectors=%v: WorkspaceBytes %d B, allocated %d B (want 1…1.25× + 512 B)", n, vectors, est, got)
			}
		}
	}
}

// TestConcurrentSolves: workspaces used from several goroutines at once
// (as the engine's workers do), at sizes on both paths and above the
// size from which a lone LAPACK call may use several threads, give the
// results of solving one after the other, to 1e-12 ‖H‖_F (a call on
// several threads may round differently).
func TestConcurrentSolves(t *testing.T) {
	rng := rand.New(rand.NewPCG(12, 3))
	sizes := []int{30, 70, 200}
	if lapackLinked {
		sizes = append(sizes, wideMin[0]) // a wide call when the others wait
	}
	mats := make([][]complex128, len(sizes))
	want := make([][]float64, len(sizes))
	for i, n := range sizes {
		mats[i] = randomHermitian(rng, n)
		want[i], _ = solveRoute(t, mats[i], n, routeAuto, false)
	}
	const workers = 4
	errs := make(chan error, workers)
	for g := 0; g < workers; g++ {
		go func() {
			var err error
			for rep := 0; rep < 3 && err == nil; rep++ {
				i := (g + rep) % len(sizes)
				n := sizes[i]
				w := NewWork(n)
				copy(w.a, mats[i])
				vectors := (g+rep)%2 == 1
				if st := w.Solve(vectors); st != OK {
					err = fmt.Errorf("n=%d: status %v", n, st)
					break
				}
				tol := 1e-12 * frobenius(mats[i])
				for k, v := range w.Values() {
					if math.Abs(v-want[i][k]) > tol {
						err = fmt.Errorf("n=%d vectors=%v: λ%d = %v concurrently, %v alone", n, vectors, k, v, want[i][k])
						break
					}
				}
			}
			errs <- err
		}()
	}
	for g := 0; g < workers; g++ {
		if err := <-errs; err != nil {
			t.Error(err)
		}
	}
}

// TestStopMidSolve: a stop channel closed during a solve, at its first,
// middle or last poll, makes that solve return Stopped, on every path; a
// LAPACK solve polls between the panels of its reduction (n/32 of them)
// and between the column blocks of its back-transformation, so more than
// n/32 times, as the pure-Go path does.
func TestStopMidSolve(t *testing.T) {
	rng := rand.New(rand.NewPCG(30, 1))
	for _, r := range routes() {
		// Two column blocks of the LAPACK back-transformation; the
		// pure-Go path (slow under the race detector) polls by rows.
		n := 100
		if r.route == routeLAPACK {
			n = lapackBlockCols + 44
		}
		h := randomHermitian(rng, n)
		for _, vectors := range []bool{false, true} {
			w := NewWork(n)
			w.route = r.route
			polls := 0
			w.onPoll = func() { polls++ }
			w.SetStop(make(chan struct{}))
			copy(w.a, h)
			if st := w.Solve(vectors); st != OK {
				t.Fatalf("%s vectors=%v: status %v", r.name, vectors, st)
			}
			if polls <= n/32 {
				t.Errorf("%s vectors=%v: %d polls in a solve of n=%d; want more than %d", r.name, vectors, polls, n, n/32)
			}
			total := polls
			for _, at := range []int{1, total / 2, total} {
				done := make(chan struct{})
				polls = 0
				w.onPoll = func() {
					if polls++; polls == at {
						close(done)
					}
				}
				w.SetStop(done)
				copy(w.a, h)
				if st := w.Solve(vectors); st != Stopped {
					t.Errorf("%s vectors=%v: stop at poll %d of %d gave status %v; want Stopped", r.name, vectors, at, total, st)
				}
			}
		}
	}
}

// BenchmarkPollGaps reports the longest stretch between two polls of the
// stop channel in a solve (max-gap-ms), that is the worst delay between a
// cancel and the solver's return, for the sizes of 256 and 512 sites.
func BenchmarkPollGaps(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, n := range []int{768, 1536} {
		h := randomHermitian(rng, n)
		for _, vectors := range []bool{false, true} {
			for _, r := range routes() {
				if r.route == routeAuto {
					continue
				}
				b.Run(fmt.Sprintf("%s/n=%d/vectors=%v", r.name, n, vectors), func(b *testing.B) {
					w := NewWork(n)
					w.route = r.route
					w.SetStop(make(chan struct{}))
					var last time.Time
					var gap time.Duration
					w.onPoll = func() {
						now := time.Now()
						gap = max(gap, now.Sub(last))
						last = now
					}
					for b.Loop() {
						copy(w.a, h)
						last = time.Now()
						if st := w.Solve(vectors); st != OK {
							b.Fatalf("status %v", st)
						}
						gap = max(gap, time.Since(last))
					}
					b.ReportMetric(float64(gap)/1e6, "max-gap-ms")
				})
			}
		}
	}
}

// TestWorkScale: cost estimates scale the pure-Go path's operation count
// by WorkScale. It is 1 wherever the pure-Go path runs (every n without
// LAPACK, below the crossover with it) and, where LAPACK runs, in (0, 1]
// and never rising with n (the measured speed-up only grows with n), so
// that a larger matrix is never estimated cheaper than a smaller one.
func TestWorkScale(t *testing.T) {
	for _, vectors := range []bool{false, true} {
		prev := 1.0
		for n := 1; n <= 2048; n++ {
			f := WorkScale(n, vectors)
			w := Work{n: n}
			switch {
			case !w.useLAPACK(vectors) && f != 1:
				t.Fatalf("n = %d vectors %v: scale %g on the pure-Go path; want 1", n, vectors, f)
			case !(f > 0 && f <= prev):
				t.Fatalf("n = %d vectors %v: scale %g after %g; want in (0, previous]", n, vectors, f, prev)
			}
			if x := float64(n); f*x*x*x < prev*(x-1)*(x-1)*(x-1) {
				t.Fatalf("n = %d vectors %v: scaled n³ %g below n−1's %g", n, vectors, f*x*x*x, prev*(x-1)*(x-1)*(x-1))
			}
			prev = f
		}
		if !lapackLinked && prev != 1 {
			t.Errorf("vectors %v: scale %g at n = 2048 without LAPACK; want 1", vectors, prev)
		}
		if lapackLinked && prev == 1 {
			t.Errorf("vectors %v: scale 1 at n = 2048 with LAPACK; want the measured speed-up counted", vectors)
		}
	}
}
