// Helpers of the thermo tests beyond the shared ones of
// physics/internal/testmodels: the benchmark sink, a finiteness check, the
// DOS of a grid and its integral.

package thermo

import (
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// benchSink keeps benchmark results alive.
var benchSink any

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func mustDOS(t testing.TB, m *physics.Model, g *physics.GridModes, opt spectra.DOSOptions) *spectra.DOSResult {
	t.Helper()
	r, err := spectra.ComputeDOS(testmodels.Ctx(t), m, g, opt)
	if err != nil {
		t.Fatalf("ComputeDOS(%+v): %v", opt, err)
	}
	return r
}

// integral is Σ DOS·Step: the states in the window (the samples are bin
// averages).
func integral(r *spectra.DOSResult, dos []float64) float64 {
	step := r.Freq[1] - r.Freq[0]
	s := 0.0
	for _, x := range dos {
		s += x * step
	}
	return s
}
