package transport

import (
	"runtime"
	"runtime/debug"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// measureAlloc runs fn with the collector off and returns the bytes it
// allocated (growth of runtime.MemStats.TotalAlloc): nothing is freed, so
// this bounds the live peak from above, deterministically (the method of
// physics/thermo's TestCostLadder).
func measureAlloc(t *testing.T, fn func()) int64 {
	t.Helper()
	old := debug.SetGCPercent(-1)
	defer debug.SetGCPercent(old)
	var a, b runtime.MemStats
	runtime.ReadMemStats(&a)
	fn()
	runtime.ReadMemStats(&b)
	return int64(b.TotalAlloc - a.TotalAlloc)
}

// TestConductivityCost: the estimate lies between 1× and 2× of the
// measured allocation for a ladder of grids, series, defects and
// cumulative curves.
func TestConductivityCost(t *testing.T) {
	m := compile(t, isoCrystal(isoA, isoMass, isoK, "X"))
	for _, tc := range []struct {
		n, temps, series, bins int
		defects                bool
	}{
		{4, 3, 1, 0, false}, {8, 20, 1, 0, false}, {12, 50, 3, 100, true}, {16, 10, 2, 0, true}, {20, 100, 4, 200, false},
	} {
		spec := mesh.GridSpec{Mesh: [3]int{tc.n, tc.n, tc.n}}
		opt := Options{Grid: spec, TempsK: make([]float64, tc.temps), Defects: PointDefects{On: tc.defects, SiteG2: []float64{1e-3}},
			PowerLaw: PowerLaw{On: true, RatePerS: 1e9}, CumulativeTempK: 300, CumulativeBins: tc.bins}
		for i := range opt.TempsK {
			opt.TempsK[i] = 10 + 10*float64(i)
		}
		for i := 0; i < tc.series; i++ {
			opt.Boundaries = append(opt.Boundaries, Boundary{Kind: Grain, SizeM: 1e-6 * float64(i+1)})
		}
		if tc.bins == 0 {
			opt.CumulativeTempK = 0
		}
		if _, err := Compute(testCtx(t), m, opt); err != nil { // warm: symmetry, long-wave limit
			t.Fatal(err)
		}
		got := measureAlloc(t, func() {
			if _, err := Compute(testCtx(t), m, opt); err != nil {
				t.Error(err)
			}
		})
		est := ConductivityCost(physics.GridSize{Sites: 1, P: 3, Dim: 3, Interactions: m.Interactions(), Points: spec.Count()}, tc.temps, max(1, tc.series), tc.defects, tc.bins)
		r := float64(est.Bytes) / float64(got)
		t.Logf("%d³ grid, %d temps, %d series, defects %v, bins %d: estimate %d, measured %d, ratio %.2f", tc.n, tc.temps, tc.series, tc.defects, tc.bins, est.Bytes, got, r)
		if r < 1 || r > 2 {
			t.Errorf("ratio %.2f outside [1, 2]", r)
		}
	}
}
