// Helpers of the thermo tests beyond the shared ones of
// physics/internal/testmodels: the benchmark sink, a finiteness check and
// the DOS of a grid.

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
