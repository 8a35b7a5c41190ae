// Short names for the shared test helpers (physics/internal/testmodels),
// as the tests of the core spell them.

package spectra

import (
	"context"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
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
