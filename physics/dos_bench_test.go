package physics

import (
	"context"
	"fmt"
	"sync"
	"testing"

	"github.com/materials-lab/modegrid/physics/mesh"
)

// benchSink keeps benchmark results alive.
var benchSink any

// benchGrids caches grid modes across benchmarks: a 48³ grid of the
// rock-salt-like example takes about a second to diagonalise, and the
// benchmarks time only what comes after ("frequencies given").
var benchGrids struct {
	sync.Mutex
	m map[string]*GridModes
}

func benchModes(b *testing.B, name string, n int, opt GridOptions) (*Model, *GridModes) {
	b.Helper()
	m := mustCompile(b, loadExample(b, name))
	key := fmt.Sprintf("%s/%d/%v", name, n, opt)
	benchGrids.Lock()
	defer benchGrids.Unlock()
	if benchGrids.m == nil {
		benchGrids.m = map[string]*GridModes{}
	}
	g := benchGrids.m[key]
	if g == nil {
		var err error
		g, err = m.GridModes(context.Background(), mesh.GridSpec{Mesh: [3]int{n, n, n}}, opt)
		if err != nil {
			b.Fatal(err)
		}
		benchGrids.m[key] = g
	}
	return m, g
}

// BenchmarkTetraDOS times the tetrahedron DOS of the rock-salt-like example
// (2 sites, 6 branches) on n³ grids, default window (501 samples), from
// given frequencies; the project's target is 48³ in under 0.2 s.
func BenchmarkTetraDOS(b *testing.B) {
	for _, n := range []int{12, 24, 48} {
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			m, g := benchModes(b, "rocksalt-like", n, GridOptions{Projections: true})
			b.ResetTimer()
			for b.Loop() {
				r, err := ComputeDOS(context.Background(), m, g, DOSOptions{})
				if err != nil {
					b.Fatal(err)
				}
				benchSink = r
			}
		})
	}
	b.Run("n=48-per-site", func(b *testing.B) {
		m, g := benchModes(b, "rocksalt-like", 48, GridOptions{Projections: true})
		b.ResetTimer()
		for b.Loop() {
			r, err := ComputeDOS(context.Background(), m, g, DOSOptions{PerSite: true})
			if err != nil {
				b.Fatal(err)
			}
			benchSink = r
		}
	})
}

// BenchmarkGaussianDOS times the Gaussian DOS (default width) of the same
// grids.
func BenchmarkGaussianDOS(b *testing.B) {
	for _, n := range []int{12, 24, 48} {
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			m, g := benchModes(b, "rocksalt-like", n, GridOptions{Projections: true})
			b.ResetTimer()
			for b.Loop() {
				r, err := ComputeDOS(context.Background(), m, g, DOSOptions{Method: Gaussian})
				if err != nil {
					b.Fatal(err)
				}
				benchSink = r
			}
		})
	}
}
