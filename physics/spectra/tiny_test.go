package spectra

import (
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// TestDOSTinyFrequencyScale: every force constant times 2⁻³²⁰ scales every
// frequency by 2⁻¹⁶⁰ ≈ 6.8e-49 (ν ∝ √(k/m)), so the tetrahedron DOS per
// unit frequency must scale by 2¹⁶⁰ on a window scaled by 2⁻¹⁶⁰, with the
// same state counts (derived: g_s(ν) = g(ν/s)/s for ν_s = s·ν). Before the
// simplex counts ran on abscissae of spacing near 1, a cube of corner
// differences near 1e-120 THz underflowed to 0 and the DOS came out NaN
// and +Inf. Chain (segments), square net (triangles), fcc and rock-salt-
// like (tetrahedra, by symmetry class for the total and every simplex per
// site).
func TestDOSTinyFrequencyScale(t *testing.T) {
	const kScale, nuScale = 0x1p-320, 0x1p-160
	for _, tc := range []struct {
		name string
		n    [3]int
	}{{"chain", [3]int{64}}, {"square-net", [3]int{12, 12}}, {"fcc", [3]int{6, 6, 6}}, {"rocksalt-like", [3]int{4, 4, 4}}} {
		t.Run(tc.name, func(t *testing.T) {
			c := testmodels.Load(t, tc.name)
			tiny := testmodels.Load(t, tc.name)
			for i := range tiny.Shells {
				tiny.Shells[i].KLong *= kScale
				tiny.Shells[i].KTrans *= kScale
			}
			for i := range tiny.Springs {
				tiny.Springs[i].KLong *= kScale
				tiny.Springs[i].KTrans *= kScale
			}
			spec := mesh.GridSpec{Mesh: tc.n}
			for _, perSite := range []bool{false, true} {
				opt := physics.GridOptions{Projections: perSite}
				ref := mustDOS(t, testmodels.Compile(t, c), testmodels.Modes(t, testmodels.Compile(t, c), spec, opt), DOSOptions{PerSite: perSite})
				mt := testmodels.Compile(t, tiny)
				got := mustDOS(t, mt, testmodels.Modes(t, mt, spec, opt), DOSOptions{PerSite: perSite})
				if len(got.DOS) != len(ref.DOS) {
					t.Fatalf("per site %v: %d samples, want %d", perSite, len(got.DOS), len(ref.DOS))
				}
				peak := 0.0
				for _, v := range ref.DOS {
					peak = max(peak, v)
				}
				for i := range ref.DOS {
					// 1e-9 of the peak: the frequencies of the two models agree to rounding only.
					if d := got.DOS[i]*nuScale - ref.DOS[i]; !(math.Abs(d) <= 1e-9*peak) || math.Abs(got.Integrated[i]-ref.Integrated[i]) > 1e-9 {
						t.Fatalf("per site %v, sample %d: DOS·2⁻¹⁶⁰ %v, integrated %v; want %v, %v", perSite, i, got.DOS[i]*nuScale, got.Integrated[i], ref.DOS[i], ref.Integrated[i])
					}
				}
			}
		})
	}
}
