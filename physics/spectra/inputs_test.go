package spectra

import (
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// TestDOSOptionBounds: DOS window, step and width are bounded where they
// enter, so that window arithmetic cannot overflow into NaN samples.
func TestDOSOptionBounds(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "chain"))
	g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{16}}, physics.GridOptions{})
	for _, tc := range []struct {
		name  string
		opt   DOSOptions
		field string
	}{
		{"huge width", DOSOptions{Method: Gaussian, Width: 1e308}, "width"},
		{"tiny width", DOSOptions{Method: Gaussian, Width: 5e-324}, "width"},
		{"huge window", DOSOptions{Min: -1e308, Max: 1e308}, "min"},
		{"huge step", DOSOptions{Step: 1e300}, "step"},
	} {
		_, err := ComputeDOS(testmodels.Ctx(t), m, g, tc.opt)
		if !strings.Contains(strings.Join(testmodels.ViolationFields(err), ","), tc.field) {
			t.Errorf("%s: %v; want a violation of %s", tc.name, err, tc.field)
		}
	}
}

// TestUnstableStaysNegative: a genuinely unstable chain (negative
// second-neighbour spring, Kittel ch. 4) still reports negative
// frequencies, flagged imaginary, on every path.
func TestUnstableStaysNegative(t *testing.T) {
	m := testmodels.Compile(t, testmodels.UnstableChain())
	pm := m.Point([3]float64{0.05}, physics.ModeOptions{})
	if !(pm.FreqTHz[0] < 0) || !pm.Imaginary {
		t.Errorf("q=0.05: %v THz, Imaginary %v; want negative, imaginary", pm.FreqTHz, pm.Imaginary)
	}
	if lo, _, stable, err := m.Stability(testmodels.Ctx(t), 16); err != nil || stable || !(lo < 0) {
		t.Errorf("Stability: lowest %g, stable %v, err %v; want unstable", lo, stable, err)
	}
	g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{16}}, physics.GridOptions{})
	if d := mustDOS(t, m, g, DOSOptions{}); d.Imaginary == 0 {
		t.Error("DOS counts no imaginary mode")
	}
}
