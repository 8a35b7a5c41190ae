package thermo

import (
	"context"
	"fmt"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// BenchmarkThermal times ComputeThermal at 1 000 temperatures (2 K to
// 2000 K) from the given modes of the rock-salt-like example on n³ grids;
// the project's target is 48³ in under 0.2 s. The msd variants add the
// displacement tensors of both sites (nine channels more per mode).
func BenchmarkThermal(b *testing.B) {
	temps := make([]float64, 1000)
	for i := range temps {
		temps[i] = 2 * float64(i+1)
	}
	for _, tc := range []struct {
		n   int
		msd bool
	}{{12, false}, {24, false}, {48, false}, {24, true}, {48, true}} {
		name := fmt.Sprintf("n=%d", tc.n)
		if tc.msd {
			name += "-msd"
		}
		b.Run(name, func(b *testing.B) {
			m, g := testmodels.BenchGrid(b, "rocksalt-like", tc.n, physics.GridOptions{Eigenvectors: tc.msd})
			b.ResetTimer()
			for b.Loop() {
				r, err := ComputeThermal(context.Background(), m, g, ThermalOptions{TempsK: temps, MSD: tc.msd})
				if err != nil {
					b.Fatal(err)
				}
				benchSink = r
			}
		})
	}
	b.Run("n=48-direct", func(b *testing.B) {
		m, g := testmodels.BenchGrid(b, "rocksalt-like", 48, physics.GridOptions{})
		b.ResetTimer()
		for b.Loop() {
			r, err := computeThermal(context.Background(), m, g, ThermalOptions{TempsK: temps}, evalDirect)
			if err != nil {
				b.Fatal(err)
			}
			benchSink = r
		}
	})
}
