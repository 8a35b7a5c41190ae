// Tests of StreamModes: order, chunking, options, bounded memory,
// cancellation.

package physics_test

import (
	"context"
	"errors"
	"math/rand/v2"
	"runtime"
	"sync/atomic"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"

	"github.com/materials-lab/modegrid/physics/mesh"
)

// TestStreamModesOrder: chunks arrive in q order with the right offsets and
// at most ChunkSize points, and every point equals the single-point result.
func TestStreamModesOrder(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "rocksalt-like"))
	rng := rand.New(rand.NewPCG(51, 2))
	pts := make([]mesh.QPoint, 203)
	for i := range pts {
		q := randomQs(rng, 1)[0]
		pts[i] = mesh.QPoint{Q: q, Weight: float64(i)}
	}
	opt := physics.ModeOptions{Eigenvectors: true, Velocities: true, ChunkSize: 17}
	next := 0
	err := m.StreamModes(testCtx(t), pts, opt, func(c physics.ModeChunk) error {
		if c.Offset != next || len(c.Points) == 0 || len(c.Points) > 17 {
			t.Fatalf("chunk at %d with %d points; want offset %d, 1…17 points", c.Offset, len(c.Points), next)
		}
		for k, pm := range c.Points {
			i := c.Offset + k
			if pm.Q != pts[i].Q || pm.Weight != pts[i].Weight {
				t.Fatalf("point %d: q %v w %v; want %v %v", i, pm.Q, pm.Weight, pts[i].Q, pts[i].Weight)
			}
			want := m.Point(pts[i].Q, opt)
			if !testmodels.CloseSlices(pm.FreqTHz, want.FreqTHz, 1e-14) || pm.Imaginary != want.Imaginary {
				t.Fatalf("point %d: %v; want %v", i, pm.FreqTHz, want.FreqTHz)
			}
			for x := range want.Eigvecs {
				if pm.Eigvecs[x] != want.Eigvecs[x] {
					t.Fatalf("point %d: eigenvectors differ", i)
				}
			}
			for x := range want.VelKmS {
				if pm.VelKmS[x] != want.VelKmS[x] {
					t.Fatalf("point %d: velocities differ", i)
				}
			}
		}
		next += len(c.Points)
		return nil
	})
	if err != nil || next != len(pts) {
		t.Fatalf("err %v after %d points", err, next)
	}
}

// TestStreamModesBoundedMemory: while the emitter holds chunk 0, workers
// may finish at most the window of chunks (two per core) and no more: the
// hook checks every finished chunk against the number emitted.
func TestStreamModesBoundedMemory(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	spec, _ := physics.NormalizeGrid(mesh.GridSpec{Mesh: [3]int{8, 8, 8}}, 3)
	pts := spec.Points()
	const chunk = 4
	window := 2 * runtime.GOMAXPROCS(0)
	var emitted atomic.Int64
	var violated atomic.Int64
	full := make(chan struct{})
	physics.SetTestHookChunkDone(func(c int) {
		if int64(c) >= emitted.Load()+int64(window) {
			violated.Store(int64(c) + 1)
		}
		if c == window-1 {
			close(full)
		}
	})
	defer physics.SetTestHookChunkDone(nil)
	ctx := testCtx(t)
	err := m.StreamModes(ctx, pts, physics.ModeOptions{ChunkSize: chunk, Eigenvectors: true}, func(c physics.ModeChunk) error {
		if c.Offset == 0 {
			select { // let the workers run as far ahead as they may
			case <-full:
			case <-ctx.Done():
				t.Fatal("workers never filled the window")
			}
		}
		emitted.Add(1)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if v := violated.Load(); v != 0 {
		t.Fatalf("chunk %d finished with only %d emitted (window %d)", v-1, emitted.Load(), window)
	}
}

// TestStreamModesStops: cancelling mid-stream returns context.Canceled; an
// error from emit is returned as is; a bad point is a *ValidationError.
func TestStreamModesStops(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Supercell(t, testmodels.Load(t, "rocksalt-like"), testmodels.ConventionalCell))
	spec, _ := physics.NormalizeGrid(mesh.GridSpec{Mesh: [3]int{16, 16, 16}}, 3)
	pts := spec.Points()
	ctx, cancel := context.WithCancel(testCtx(t))
	got := 0
	err := m.StreamModes(ctx, pts, physics.ModeOptions{ChunkSize: 8, Eigenvectors: true, Velocities: true}, func(c physics.ModeChunk) error {
		got += len(c.Points)
		cancel()
		return nil
	})
	if !errors.Is(err, context.Canceled) || got >= len(pts) {
		t.Fatalf("err %v after %d of %d points; want context.Canceled early", err, got, len(pts))
	}
	stop := errors.New("enough")
	err = m.StreamModes(testCtx(t), pts, physics.ModeOptions{ChunkSize: 8}, func(physics.ModeChunk) error { return stop })
	if err != stop {
		t.Fatalf("err %v; want the emitter's", err)
	}
	discard := func(physics.ModeChunk) error { return nil }
	if err := m.StreamModes(testCtx(t), []mesh.QPoint{{Q: [3]float64{0, 0, 2}}}, physics.ModeOptions{}, discard); err != nil {
		t.Fatalf("q3 = 2 is valid in 3D: %v", err)
	}
	chain := testmodels.Compile(t, testmodels.Load(t, "chain"))
	if _, ok := chain.StreamModes(testCtx(t), []mesh.QPoint{{Q: [3]float64{0, 0.5, 0}}}, physics.ModeOptions{}, discard).(*physics.ValidationError); !ok {
		t.Fatal("q2 ≠ 0 in 1D must be a *ValidationError")
	}
}

// TestDefaultChunkBounded: the default chunk keeps a chunk near
// DefaultChunkBytes even with eigenvectors of a large model.
func TestDefaultChunkBounded(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Supercell(t, testmodels.Supercell(t, testmodels.Load(t, "rocksalt-like"), testmodels.ConventionalCell), [3][3]int{{2, 0, 0}, {0, 2, 0}, {0, 0, 2}}))
	n := m.ModeCount()
	c := m.ChunkPoints(physics.ModeOptions{Eigenvectors: true})
	if bytes := c * 16 * n * n; bytes > physics.DefaultChunkBytes || c < 1 {
		t.Errorf("default chunk of %d points holds %d bytes of eigenvectors", c, bytes)
	}
	if c := m.ChunkPoints(physics.ModeOptions{}); c != physics.DefaultChunkPoints {
		t.Errorf("frequencies only: %d points; want %d", c, physics.DefaultChunkPoints)
	}
}
