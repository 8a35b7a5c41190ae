// Benchmarks of the engine: per-q cost on a size ladder, the two-site
// eigenvalue solve, and whole 48³ grids.

package physics_test

import (
	"context"
	"fmt"
	"math/rand/v2"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"

	"github.com/materials-lab/modegrid/physics/eigen"
	"github.com/materials-lab/modegrid/physics/mesh"
)

func randomQs(rng *rand.Rand, n int) [][3]float64 {
	qs := make([][3]float64, n)
	for i := range qs {
		qs[i] = [3]float64{rng.Float64() - 0.5, rng.Float64() - 0.5, rng.Float64() - 0.5}
	}
	return qs
}

var sinkPoint physics.PointModes

// BenchmarkModesPerQ is the cost of one q-point on one core, reusing the
// worker's workspace as the grid and stream loops do: D(q) assembly plus
// eigenvalues (freq), plus eigenvectors (vectors), plus group velocities
// (velocities).
func BenchmarkModesPerQ(b *testing.B) {
	rng := rand.New(rand.NewPCG(7, 7))
	qs := randomQs(rng, 64)
	for _, l := range testmodels.Ladder(b) {
		n := l.M.ModeCount()
		for _, kind := range []string{"freq", "vectors", "velocities"} {
			opt := physics.ModeOptions{Eigenvectors: kind != "freq", Velocities: kind == "velocities"}
			b.Run(fmt.Sprintf("sites=%d/%s", l.Sites, kind), func(b *testing.B) {
				w := l.M.NewPointWork()
				pm := physics.PointModes{FreqTHz: make([]float64, n)}
				if opt.Eigenvectors {
					pm.Eigvecs = make([]complex128, n*n)
				}
				if opt.Velocities {
					pm.VelKmS = make([][3]float64, n)
				}
				w.Point(&pm, opt) // warm the lazily built parts
				b.ReportAllocs()
				i := 0
				for b.Loop() {
					pm.Q = qs[i%len(qs)]
					i++
					w.Point(&pm, opt)
				}
				sinkPoint = pm
			})
		}
	}
}

// BenchmarkTwoSiteEigenvalues is the 6×6 Hermitian eigenvalue solve alone on
// dynamical matrices of the two-site crystal at random q (the project's
// 1.5 µs target), and the D(q) assembly alone.
func BenchmarkTwoSiteEigenvalues(b *testing.B) {
	m := testmodels.Compile(b, testmodels.Load(b, "rocksalt-like"))
	rng := rand.New(rand.NewPCG(8, 8))
	qs := randomQs(rng, 64)
	mats := make([][]complex128, len(qs))
	for i, q := range qs {
		mats[i] = m.DynamicalMatrix(q, nil)
	}
	b.Run("solve", func(b *testing.B) {
		w := eigen.NewWork(6)
		b.ReportAllocs()
		i := 0
		for b.Loop() {
			copy(w.A(), mats[i%len(mats)])
			i++
			w.Solve(false)
		}
		sinkEigen = w.Values()
	})
	b.Run("assemble", func(b *testing.B) {
		w := eigen.NewWork(6)
		var t physics.PhaseTable
		b.ReportAllocs()
		i := 0
		for b.Loop() {
			m.Assemble(qs[i%len(qs)], w.A(), &t)
			i++
		}
	})
}

var sinkGrid *physics.GridModes

// BenchmarkGrid48 computes all frequencies of a 48×48×48 Γ-centred grid
// (110 592 points, no symmetry) on all cores, through GridModes and through
// StreamModes, for the one-site fcc and the two-site rock-salt-like
// examples. ns/op is wall time for the whole grid.
func BenchmarkGrid48(b *testing.B) {
	spec := mesh.GridSpec{Mesh: [3]int{48, 48, 48}}
	for _, name := range []string{"fcc", "rocksalt-like"} {
		m := testmodels.Compile(b, testmodels.Load(b, name))
		b.Run(name+"/GridModes", func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				g, err := m.GridModes(context.Background(), spec, physics.GridOptions{NoSymmetry: true})
				if err != nil {
					b.Fatal(err)
				}
				sinkGrid = g
			}
		})
		b.Run(name+"/GridModesSymmetry", func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				g, err := m.GridModes(context.Background(), spec, physics.GridOptions{})
				if err != nil {
					b.Fatal(err)
				}
				sinkGrid = g
			}
		})
		pts := spec.Points()
		b.Run(name+"/StreamModes", func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				var got int
				err := m.StreamModes(context.Background(), pts, physics.ModeOptions{}, func(c physics.ModeChunk) error {
					got += len(c.Points)
					return nil
				})
				if err != nil || got != len(pts) {
					b.Fatal(err, got)
				}
			}
		})
	}
}

// sinkEigen keeps the benchmarked eigenvalues alive.
var sinkEigen []float64

// BenchmarkAssembly times the dynamical matrices of a batch of q-points
// (ns/op: the whole batch), assembled one point at a time by the loop
// ("loop") and as two matrix products ("batched", dynbatch.go), on models
// with springs over ±reach cells — as many cell offsets as folded
// supercell force constants have. The measured costs per element and per
// stack entry it reports set the crossover (stackLoopNs, stackGemmNs).
func BenchmarkAssembly(b *testing.B) {
	rng := rand.New(rand.NewPCG(9, 9))
	for _, f := range []struct{ sites, reach int }{{2, 2}, {2, 3}, {2, 5}, {2, 8}, {8, 2}, {16, 2}, {64, 1}} {
		m := farModel(b, f.sites, f.reach)
		nm := m.ModeCount()
		for _, batched := range []bool{false, true} {
			m.SetStack(batched)
			q := m.BatchPoints()
			if !batched {
				m.SetStack(true)
				q = m.BatchPoints() // the same points for both
				m.SetStack(false)
			}
			qs := randomQs(rng, q)
			name := fmt.Sprintf("sites=%d/reach=%d/Q=%d/loop", f.sites, f.reach, q)
			if batched {
				name = fmt.Sprintf("sites=%d/reach=%d/Q=%d/batched", f.sites, f.reach, q)
			}
			b.Run(name, func(b *testing.B) {
				a := make([]complex128, nm*nm)
				var t physics.PhaseTable
				for b.Loop() {
					if batched {
						m.BatchAssemble(qs, a)
						continue
					}
					for _, q := range qs {
						m.Assemble(q, a, &t)
					}
				}
			})
		}
	}
}
