package scatter

import (
	"context"
	"flag"
	"testing"

	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

var dwTable = flag.Bool("dw.convergence", false, "print the Debye–Waller grid convergence table")

func TestDWConvergenceTable(t *testing.T) {
	if !*dwTable {
		t.Skip("run with -args -dw.convergence")
	}
	for _, name := range []string{"fcc", "rocksalt-like"} {
		m := testmodels.Compile(t, testmodels.Load(t, name))
		for _, T := range []float64{0, 300} {
			ref, err := DebyeWaller(context.Background(), m, DWOptions{Mesh: [3]int{48, 48, 48}}, T, false, nil)
			if err != nil {
				t.Fatal(err)
			}
			for _, n := range []int{8, 12, 16, 24, 32} {
				u, err := DebyeWaller(context.Background(), m, DWOptions{Mesh: [3]int{n, n, n}}, T, false, nil)
				if err != nil {
					t.Fatal(err)
				}
				t.Logf("%s T=%g n=%d U0xx=%.6g (48: %.6g) rel %.2e", name, T, n, u.U[0][0], ref.U[0][0], u.U[0][0]/ref.U[0][0]-1)
			}
		}
	}
}
