// Short names for the shared test helpers (physics/internal/testmodels),
// as the tests of the core spell them.

package thermo

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
)

func exampleNames(t testing.TB) []string                     { return testmodels.Names(t) }
func loadExample(t testing.TB, name string) *physics.Crystal { return testmodels.Load(t, name) }
func mustCompile(t testing.TB, c *physics.Crystal) *physics.Model {
	t.Helper()
	return testmodels.Compile(t, c)
}
func cloneCrystal(c *physics.Crystal) *physics.Crystal { return testmodels.Clone(c) }
func specCtx(t testing.TB) context.Context             { return testmodels.Ctx(t) }
func testCtx(t testing.TB) context.Context             { return testmodels.Ctx(t) }
func maxAbs(xs []float64) float64                      { return testmodels.MaxAbs(xs) }
func modesOn(t testing.TB, m *physics.Model, spec mesh.GridSpec, opt physics.GridOptions) *physics.GridModes {
	t.Helper()
	return testmodels.Modes(t, m, spec, opt)
}
func exampleGrid(t testing.TB, name string, spec mesh.GridSpec, opt physics.GridOptions) (*physics.Model, *physics.GridModes) {
	t.Helper()
	return testmodels.Grid(t, name, spec, opt)
}
func violationFields(err error) []string { return testmodels.ViolationFields(err) }

const raceEnabled = testmodels.RaceEnabled

var (
	chainNuMaxTHz    = testmodels.ChainNuMaxTHz
	conventionalCell = testmodels.ConventionalCell
)

// benchSink keeps benchmark results alive.
var benchSink any

func mustSymmetry(t testing.TB, m *physics.Model) []physics.SymOp { return testmodels.Symmetry(t, m) }
func mustElasticTheta(t testing.TB, m *physics.Model) float64     { return testmodels.ElasticTheta(t, m) }
func triclinic() *physics.Crystal                                 { return testmodels.Triclinic() }
func brokenFCC(t testing.TB) *physics.Crystal                     { return testmodels.BrokenFCC(t) }
func unstableChain() *physics.Crystal                             { return testmodels.UnstableChain() }
func bigCrystal(t testing.TB, m1, m2, m3 int) *physics.Crystal {
	return testmodels.BigCrystal(t, m1, m2, m3)
}
func ladder(b testing.TB) []testmodels.Rung { return testmodels.Ladder(b) }
func benchModes(b *testing.B, name string, n int, opt physics.GridOptions) (*physics.Model, *physics.GridModes) {
	return testmodels.BenchGrid(b, name, n, opt)
}
func cancelMidway(t *testing.T, after int64, stage func(ctx context.Context) error) time.Duration {
	return testmodels.CancelMidway(t, after, stage)
}
func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func mustDOS(t testing.TB, m *physics.Model, g *physics.GridModes, opt spectra.DOSOptions) *spectra.DOSResult {
	t.Helper()
	r, err := spectra.ComputeDOS(specCtx(t), m, g, opt)
	if err != nil {
		t.Fatalf("ComputeDOS(%+v): %v", opt, err)
	}
	return r
}

type propCase = testmodels.PropCase

func propCases(t *testing.T) []*propCase { return testmodels.PropCases(t) }
func propRNG(seed uint64) *rand.Rand     { return testmodels.PropRNG(seed) }

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
