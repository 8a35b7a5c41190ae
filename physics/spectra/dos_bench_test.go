package spectra

import (
	"context"
	"fmt"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// benchSink keeps benchmark results alive.
var benchSink any

// BenchmarkTetraDOS times the tetrahedron DOS of the rock-salt-like example
// (2 sites, 6 branches) on n³ grids, default window (501 samples), from
// given frequencies; the project's target is 48³ in under 0.2 s.
func BenchmarkTetraDOS(b *testing.B) {
	for _, n := range []int{12, 24, 48} {
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			m, g := testmodels.BenchGrid(b, "rocksalt-like", n, physics.GridOptions{Projections: true})
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
		m, g := testmodels.BenchGrid(b, "rocksalt-like", 48, physics.GridOptions{Projections: true})
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
			m, g := testmodels.BenchGrid(b, "rocksalt-like", n, physics.GridOptions{Projections: true})
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
