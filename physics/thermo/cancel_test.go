// Tests of cancellation: every long stage stops when its context ends,
// returns the context's error, and keeps nothing half-computed.

package thermo

import (
	"context"
	"errors"
	"flag"
	"sync"
	"testing"
	"time"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// TestCancelThermal: the thermal sums over a large grid and many
// temperatures stop when cancelled.
func TestCancelThermal(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "rocksalt-like"))
	g, err := m.GridModes(context.Background(), mesh.GridSpec{Mesh: [3]int{48, 48, 48}}, physics.GridOptions{})
	if err != nil {
		t.Fatal(err)
	}
	temps := make([]float64, 4000)
	for i := range temps {
		temps[i] = 1 + float64(i)/4
	}
	lat := testmodels.CancelMidway(t, 3, func(ctx context.Context) error {
		_, err := ComputeThermal(ctx, m, g, ThermalOptions{TempsK: temps})
		return err
	})
	t.Logf("ComputeThermal, 48³ × 4000 temperatures: returned %v after cancellation", lat)
}

var cancelTable = flag.Bool("cancel.table", false, "measure the cancel-to-return latency of every long stage at 512 sites (slow)")

// TestCancelLatencyTable measures, for every long stage on a 512-site model
// (and the grid stages on large grids), the time from cancellation to
// return, cancelling after a ladder of delays so that every phase of the
// stage is hit. It asserts nothing; it prints the table quoted in
// DEVELOPERS.md. Run:
//
//	go test -run TestCancelLatencyTable -v ./physics/thermo -args -cancel.table
func TestCancelLatencyTable(t *testing.T) {
	if !*cancelTable {
		t.Skip("the latency table runs with -args -cancel.table")
	}
	c512 := testmodels.BigCrystal(t, 4, 4, 4)
	m512 := testmodels.Compile(t, c512)
	fcc := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	testmodels.Symmetry(t, fcc)
	g96, err := fcc.GridModes(context.Background(), mesh.GridSpec{Mesh: [3]int{96, 96, 96}}, physics.GridOptions{})
	if err != nil {
		t.Fatal(err)
	}
	delays := []time.Duration{time.Millisecond, 10 * time.Millisecond, 30 * time.Millisecond, 100 * time.Millisecond, 300 * time.Millisecond, time.Second, 3 * time.Second, 10 * time.Second}
	stages := []struct {
		name  string
		stage func(ctx context.Context) error
	}{
		{"Compile, 512 sites", func(ctx context.Context) error { _, err := physics.Compile(ctx, c512, physics.Options{}); return err }},
		{"Symmetry, 512 sites", func(ctx context.Context) error { _, err := m512.Symmetry(ctx); return err }},
		{"long-wave set-up, 512 sites", func(ctx context.Context) error {
			_, err := m512.SoundVelocities(ctx, [3]float64{1, 0, 0})
			return err
		}},
		{"Stability mesh 2, 512 sites", func(ctx context.Context) error { _, _, _, err := m512.Stability(ctx, 2); return err }},
		{"ReduceGrid 161×160×159 (fcc)", func(ctx context.Context) error {
			_, err := fcc.ReduceGrid(ctx, mesh.GridSpec{Mesh: [3]int{161, 160, 159}}, nil)
			return err
		}},
		{"GridModes 160³ no symmetry (fcc)", func(ctx context.Context) error {
			_, err := fcc.GridModes(ctx, mesh.GridSpec{Mesh: [3]int{160, 160, 160}}, physics.GridOptions{NoSymmetry: true})
			return err
		}},
		{"tetrahedron DOS 96³, cold classes (fcc)", func(ctx context.Context) error {
			// g96 has no ReductionCache: the classes are built every time.
			_, err := spectra.ComputeDOS(ctx, fcc, g96, spectra.DOSOptions{})
			return err
		}},
		{"ComputeThermal 96³ × 20 000 temperatures (fcc)", func(ctx context.Context) error {
			temps := make([]float64, 20000)
			for i := range temps {
				temps[i] = 1 + float64(i)/20
			}
			_, err := ComputeThermal(ctx, fcc, g96, ThermalOptions{TempsK: temps})
			return err
		}},
	}
	t.Logf("| stage | cancellations | largest cancel-to-return | mean |")
	t.Logf("|---|---|---|---|")
	for _, st := range stages {
		var worst, sum time.Duration
		n := 0
		for _, d := range delays {
			ctx, cancel := context.WithCancel(context.Background())
			var at time.Time
			var mu sync.Mutex
			timer := time.AfterFunc(d, func() {
				mu.Lock()
				at = time.Now()
				mu.Unlock()
				cancel()
			})
			err := st.stage(ctx)
			end := time.Now()
			timer.Stop()
			cancel()
			if !errors.Is(err, context.Canceled) {
				break // finished before this delay: later ones would too
			}
			mu.Lock()
			lat := end.Sub(at)
			mu.Unlock()
			worst = max(worst, lat)
			sum += lat
			n++
		}
		if n == 0 {
			t.Logf("| %s | 0 (finished within %v) | — | — |", st.name, delays[0])
			continue
		}
		t.Logf("| %s | %d | %.2f ms | %.2f ms |", st.name, n, ms(worst), ms(sum/time.Duration(n)))
	}
}

func ms(d time.Duration) float64 { return float64(d) / float64(time.Millisecond) }
