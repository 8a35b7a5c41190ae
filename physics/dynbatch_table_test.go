package physics_test

import (
	"flag"
	"math/rand/v2"
	"runtime"
	"syscall"
	"testing"
	"time"

	"github.com/materials-lab/modegrid/physics"
)

var assemblyTable = flag.Bool("assembly.table", false, "measure the assembly of D(q), loop against batched products, and log the table of DEVELOPERS.md")

// cpuTime is the CPU time (user + system) of the process so far: on a
// machine shared with other work it is inflated far less than wall time.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// TestAssemblyTable measures, on one core and in CPU time (the best of
// five trials), the dynamical matrices of a batch of random q-points of
// models with springs over ±reach cells, assembled one point at a time by
// the loop and as the batched products, forced either way; it logs the
// cost per point, the ratio, and which path Compile chose. The costs set
// the crossover constants of dynbatch.go. Kept out of plain test runs:
//
//	go test -run TestAssemblyTable -v ./physics -args -assembly.table
func TestAssemblyTable(t *testing.T) {
	if !*assemblyTable {
		t.Skip("a measurement; run with -args -assembly.table")
	}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(1))
	rng := rand.New(rand.NewPCG(9, 9))
	t.Logf("| sites | springs over | cells | points per batch | loop, µs per point | batched, µs per point | loop / batched | Compile chose |")
	t.Logf("|---|---|---|---|---|---|---|---|")
	for _, f := range []struct{ sites, reach int }{{2, 2}, {2, 3}, {2, 5}, {2, 8}, {8, 1}, {8, 2}, {16, 1}, {16, 2}, {32, 1}, {64, 1}} {
		m := farModel(t, f.sites, f.reach)
		chose := "loop"
		if m.HasStack() {
			chose = "batched"
		}
		m.SetStack(true)
		qs := randomQs(rng, m.BatchPoints())
		a := make([]complex128, m.ModeCount()*m.ModeCount())
		var tab physics.PhaseTable
		reps := max(1, min(200, int(3e7/float64(len(qs)*len(m.Terms())*9+1))))
		best := [2]float64{1e18, 1e18}
		for trial := 0; trial < 5; trial++ {
			for mode := range best {
				c0 := cpuTime()
				for r := 0; r < reps; r++ {
					if mode == 1 {
						m.BatchAssemble(qs, a)
						continue
					}
					for _, q := range qs {
						m.Assemble(q, a, &tab)
					}
				}
				best[mode] = min(best[mode], float64(cpuTime()-c0)/float64(reps*len(qs))/1e3)
			}
		}
		t.Logf("| %d | ±%d | %d | %d | %.1f | %.1f | %.2f | %s |", f.sites, f.reach, m.Cells(), len(qs), best[0], best[1], best[0]/best[1], chose)
	}
}
