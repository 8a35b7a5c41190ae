package physics_test

import (
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"

	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// TestSpringBlocksSameMatrix: a spring model and its springs written out
// as explicit blocks (testmodels.SpringBlocks, the form of the benchmark
// crystals' model files) have the same D(q), to 1e-12 of its largest
// element (derived: both are the spring blocks −(k∥êêᵀ + k⊥(1 − êêᵀ)) with
// the sum rule's on-site blocks, summed in another order).
func TestSpringBlocksSameMatrix(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	c := testmodels.Distorted(testmodels.Sized(t, 16), rng, 0.05, 0.05)
	springs, blocks := testmodels.Compile(t, c), testmodels.Compile(t, testmodels.SpringBlocks(c))
	for k := 0; k < 5; k++ {
		q := [3]float64{rng.Float64() - 0.5, rng.Float64() - 0.5, rng.Float64() - 0.5}
		a, b := springs.DynamicalMatrix(q, nil), blocks.DynamicalMatrix(q, nil)
		var scale, worst float64
		for x := range a {
			scale = math.Max(scale, cmplx.Abs(a[x]))
			worst = math.Max(worst, cmplx.Abs(a[x]-b[x]))
		}
		if worst > 1e-12*scale {
			t.Fatalf("q %v: the blocks' D differs from the springs' by %.3g (largest element %.3g)", q, worst, scale)
		}
	}
}
