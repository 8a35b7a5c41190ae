package physics_test

import (
	"fmt"
	"testing"

	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// elasticSink keeps the benchmark results alive.
var elasticSink float64

// BenchmarkElasticDebye: θ_D of the elastic limit (512 directions) on a
// fresh model of the rock-salt-like example and its n×n×n supercells
// (2n³ sites), the long-wave limit included (it is cached per model).
func BenchmarkElasticDebye(b *testing.B) {
	base := testmodels.Load(b, "rocksalt-like")
	for _, n := range []int{1, 2, 3} {
		c := testmodels.Supercell(b, base, [3][3]int{{n, 0, 0}, {0, n, 0}, {0, 0, n}})
		b.Run(fmt.Sprintf("sites=%d", len(c.Sites)), func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				b.StopTimer()
				m := testmodels.Compile(b, c)
				b.StartTimer()
				elasticSink = testmodels.ElasticTheta(b, m)
			}
		})
	}
}
