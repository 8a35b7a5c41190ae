package fit

import (
	"context"
	"runtime"
	"runtime/debug"
	"testing"

	"github.com/materials-lab/modegrid/physics/mesh"
)

// measuredFit runs p with the collector off and returns the bytes
// allocated (an upper bound of the live peak: nothing is freed).
func measuredFit(t *testing.T, p *Problem) int64 {
	t.Helper()
	defer debug.SetGCPercent(debug.SetGCPercent(-1))
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	if _, err := Fit(context.Background(), p); err != nil {
		t.Fatal(err)
	}
	runtime.ReadMemStats(&after)
	return int64(after.TotalAlloc - before.TotalAlloc)
}

// TestCostCoversOneEvaluation: the memory estimate of a fit, which holds
// three evaluations' worth at once (current, trial, step), covers what a
// fit of one evaluation allocates in all (set-up, the evaluation, the
// fitted model and the analysis), and is within 8× of it.
func TestCostCoversOneEvaluation(t *testing.T) {
	typical, _ := typicalProblem(t)
	heat := fixtureProblem(t)
	heat.HeatCapacities[0].Grid = mesh.GridSpec{Mesh: [3]int{10, 10, 10}}
	for name, p := range map[string]*Problem{"typical": typical, "every kind": fixtureProblem(t), "heat 10³": heat} {
		p.MaxEvaluations = 1
		m := compile(t, p.Crystal)
		size := m.GridSizeOf(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}, 1)
		est := Cost(ShapeOf(p, size, CompileCost(size, 0)))
		got := measuredFit(t, p)
		t.Logf("%s: estimate %d B, one evaluation allocates %d B (%.2f×)", name, est.Bytes, got, float64(est.Bytes)/float64(got))
		if est.Bytes < got || est.Bytes > 8*got {
			t.Errorf("%s: estimate %d B against %d B allocated; want 1× to 8×", name, est.Bytes, got)
		}
	}
}
