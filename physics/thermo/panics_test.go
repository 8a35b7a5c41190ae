// A panic in a parallel worker of the engine reaches the caller.

package thermo

import (
	"context"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
)

type faultKey struct{}

// TestWorkerPanicReachesCaller: with a fault hook that panics in the
// workers of computations whose context is marked, every parallel entry
// point of the engine panics on the caller's goroutine with a *PanicError
// carrying the hook's value (instead of ending the process), and the same
// computation on an unmarked context still succeeds.
func TestWorkerPanicReachesCaller(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "rocksalt-like"))
	spec, err := physics.NormalizeGrid(mesh.GridSpec{Mesh: [3]int{6, 6, 6}}, 3)
	if err != nil {
		t.Fatal(err)
	}
	g, err := m.GridModes(testmodels.Ctx(t), spec, physics.GridOptions{})
	if err != nil {
		t.Fatal(err)
	}
	restore := physics.SetFaultHook(func(ctx context.Context) {
		if v := ctx.Value(faultKey{}); v != nil {
			panic(v)
		}
	})
	defer restore()
	cases := []struct {
		name string
		run  func(ctx context.Context) error
	}{
		{"GridModes", func(ctx context.Context) error {
			_, err := m.GridModes(ctx, spec, physics.GridOptions{NoSymmetry: true})
			return err
		}},
		{"GridModes reduced", func(ctx context.Context) error {
			_, err := m.GridModes(ctx, spec, physics.GridOptions{})
			return err
		}},
		{"StreamModes", func(ctx context.Context) error {
			return m.StreamModes(ctx, spec.Points(), physics.ModeOptions{ChunkSize: 8}, func(physics.ModeChunk) error { return nil })
		}},
		{"ComputeDOS tetrahedron", func(ctx context.Context) error {
			_, err := spectra.ComputeDOS(ctx, m, g, spectra.DOSOptions{})
			return err
		}},
		{"ComputeDOS Gaussian", func(ctx context.Context) error {
			_, err := spectra.ComputeDOS(ctx, m, g, spectra.DOSOptions{Method: spectra.Gaussian})
			return err
		}},
		{"ComputeThermal", func(ctx context.Context) error {
			_, err := ComputeThermal(ctx, m, g, ThermalOptions{TempsK: []float64{10, 100, 300}})
			return err
		}},
	}
	for _, tt := range cases {
		t.Run(tt.name, func(t *testing.T) {
			value := "injected fault in " + tt.name
			ctx := context.WithValue(testmodels.Ctx(t), faultKey{}, value)
			p := func() (p any) {
				defer func() { p = recover() }()
				_ = tt.run(ctx)
				return nil
			}()
			pe, ok := p.(*physics.PanicError)
			if !ok {
				t.Fatalf("recovered %T %v; want *PanicError", p, p)
			}
			if pe.Value != value || len(pe.Stack) == 0 {
				t.Errorf("PanicError{Value: %v, %d bytes of stack}; want value %q and a stack", pe.Value, len(pe.Stack), value)
			}
			if err := tt.run(testmodels.Ctx(t)); err != nil {
				t.Errorf("unmarked run after the panic: %v", err)
			}
		})
	}
}
