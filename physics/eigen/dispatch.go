// Which solver a Work uses: the pure-Go Householder + QL of eigen.go, or,
// in builds with the lapack tag, LAPACK (lapack_cgo.go) from a crossover
// size up.

package eigen

import (
	"math"
	"unsafe"
)

// Crossover sizes (DEVELOPERS.md, "Measured: eigensolver size ladder").
// From lapackMin[mode] modes up a lapack build calls LAPACK: one core, CPU
// time per solve (BenchmarkLAPACKCrossover), the two paths are level at
// 64 modes for eigenvalues only (208 against 207 µs; the pure-Go path 1.1×
// faster at 56, LAPACK 1.2× at 80) and at 40 with eigenvectors (165
// against 167 µs; LAPACK 1.2× faster at 48). From wideMin[mode] up a call
// with no other LAPACK call in flight may use idle cores (lapack_cgo.go):
// on two cores, one call alone (BenchmarkLAPACKCrossover, best of 3, wall
// time against one thread), eigenvalues gained 5 % at n = 96, 6 % at 128,
// 9 % at 192, 5–6 % at 256 and 384; with eigenvectors threads lost 10–18 %
// at 96 and 128 and gained 6 % at 192, 15 % at 256, 8 % at 384 (1.5× at
// 768), for about twice the CPU time. Index 0: eigenvalues only, 1: with
// eigenvectors.
var (
	lapackMin = [2]int{64, 40}
	wideMin   = [2]int{96, 192}
)

// route forces one path regardless of size (tests and benchmarks).
type route uint8

const (
	routeAuto route = iota
	routeGo
	routeLAPACK
)

func modeIndex(vectors bool) int {
	if vectors {
		return 1
	}
	return 0
}

// useLAPACK reports whether Solve hands this matrix to LAPACK.
func (w *Work) useLAPACK(vectors bool) bool {
	if !lapackLinked {
		return false
	}
	switch w.route {
	case routeGo:
		return false
	case routeLAPACK:
		return true
	}
	return w.n >= lapackMin[modeIndex(vectors)]
}

// Backend names the solver linked into this build: "lapack" when built
// with the lapack tag (and cgo), matrices from a crossover size up then
// going to the system's LAPACK; "go" otherwise.
func Backend() string { return backendName() }

// BackendDetail describes the linked LAPACK library (OpenBLAS's version and
// build target), or is empty for the pure-Go build.
func BackendDetail() string { return backendDetail() }

// lapackWorkScale are the fractions of the pure-Go path's time that the
// LAPACK path is allowed in work estimates at a few n (index as
// lapackMin), from 1 at the crossover: each is above the measured ratio of
// the two paths' one-core times at that n (DEVELOPERS.md, "Measured:
// eigensolver size ladder": eigenvalues 0.72 at n = 96, 0.57 at 192, 0.48
// at 384, 0.43 at 768; with eigenvectors 0.47 at 96, 0.32 at 192, 0.26 at
// 384, 0.23 at 768), so estimates stay on the safe side.
var lapackWorkScale = [2][]struct {
	n     float64
	scale float64
}{
	{{192, 0.75}, {384, 0.6}},
	{{96, 0.6}, {192, 0.45}, {384, 0.35}},
}

// WorkScale is the time of a solve of order n in this build relative to
// the pure-Go path's, as cost estimates count it: 1 where the pure-Go path
// runs (every n in builds without the lapack tag); where LAPACK runs,
// lapackWorkScale's fractions joined linearly in log n from 1 at the
// crossover, the last one kept beyond, so that the scaled n³ still grows
// with n. A caller's operation count of the pure-Go path times WorkScale
// is the work of this build's solve at the same rate.
func WorkScale(n int, vectors bool) float64 {
	w := Work{n: n}
	if !w.useLAPACK(vectors) {
		return 1
	}
	m := modeIndex(vectors)
	x0, f0 := float64(lapackMin[m]), 1.0
	for _, c := range lapackWorkScale[m] {
		if float64(n) < c.n {
			if float64(n) <= x0 {
				return f0
			}
			t := math.Log(float64(n)/x0) / math.Log(c.n/x0)
			return f0 + t*(c.scale-f0)
		}
		x0, f0 = c.n, c.scale
	}
	return f0
}

// WorkspaceBytes is what one Work of size n allocates in this build for
// solves of one mode (eigenvalues only, or with eigenvectors): the input
// matrix and n-vectors, plus the pure-Go path's reflectors (and rotations
// and vectors) or the LAPACK path's workspace (and vectors), whichever
// Solve takes at n, each rounded up as the Go allocator rounds it. Callers'
// cost estimates use it.
func WorkspaceBytes(n int, vectors bool) int64 {
	nn, n1 := int64(n)*int64(n), int64(n)
	b := heapBytes(int64(unsafe.Sizeof(Work{}))) + heapBytes(16*nn) + 2*heapBytes(16*n1) + 4*heapBytes(8*n1) // a; tau, y; d, e, vals, perm
	if vectors {
		b += heapBytes(16 * nn) // vecs
	}
	w := Work{n: n}
	if w.useLAPACK(vectors) {
		return b + lapackWorkBytes(n, vectors)
	}
	b += heapBytes(16 * nn) // hv
	if vectors {
		b += heapBytes(8 * nn) // zt
	}
	return b
}

// heapBytes bounds what the Go allocator takes for an allocation of b
// bytes: large objects (above 32 KiB) in whole 8 KiB pages; small ones in
// size classes spaced at most an eighth of the next power of two apart
// (runtime/sizeclasses.go), so rounded up to a multiple of that here.
func heapBytes(b int64) int64 {
	const page, small = 8 << 10, 32 << 10
	if b > small {
		return (b + page - 1) / page * page
	}
	p := int64(16)
	for p < b {
		p *= 2
	}
	g := p / 8
	return (b + g - 1) / g * g
}
