package spectra

import (
	"flag"
	"fmt"
	"math"
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// dosConvergence enables TestDOSConvergenceTable, which takes about a
// minute (a 128³ reference grid) and so stays out of `make test`:
//
//	go test -run TestDOSConvergenceTable -v ./physics/spectra -args -dos.convergence
var dosConvergence = flag.Bool("dos.convergence", false, "run the DOS convergence study (slow)")

// convergenceL1 is the relative L1 distance Σ|g − g_ref|/Σ g_ref of two DOS
// on the same samples.
func convergenceL1(g, ref []float64) float64 {
	var d, n float64
	for i := range ref {
		d += math.Abs(g[i] - ref[i])
		n += ref[i]
	}
	return d / n
}

// TestDOSConvergenceTable measures how many q-points the tetrahedron
// (segment) method and Gaussian smearing need to bring the DOS within 1 %
// (relative L1) of the converged answer: in 1D the chain's closed form
// (2/π)/sqrt(ν_max² − ν²) (Ashcroft & Mermin ch. 23), in 3D the
// tetrahedron DOS of the rock-salt-like and fcc examples on a 128³ grid. All DOS are
// bin averages on 200 bins up to 1.05 ν_max. Gaussian smearing is shown at
// its default width ν_max/(c_d·N^(1/d)), c_d = 1, 2, 8, and at the best of
// ⅛…4 times that width for each grid (an oracle a user does not have). The test fails if
// the tetrahedron method never reaches 1 %, or needs more points than the
// Gaussian. The markdown table goes to the test log.
func TestDOSConvergenceTable(t *testing.T) {
	if !*dosConvergence {
		t.Skip("slow study; run with -args -dos.convergence")
	}
	factors := []float64{0.125, 0.25, 0.35, 0.5, 0.7, 1, 1.4, 2, 4}
	var report strings.Builder
	study := func(title string, rows []convRow) {
		fmt.Fprintf(&report, "\n### %s\n\n", title)
		fmt.Fprintf(&report, "| grid | q-points | tetrahedra L1 | Gaussian (default width) L1 | Gaussian (best width) L1 | best width / default |\n|---|---|---|---|---|---|\n")
		first := map[string]int{}
		for _, r := range rows {
			fmt.Fprintf(&report, "| %d | %d | %.2g %% | %.2g %% | %.2g %% | %.2g |\n", r.n, r.points, 100*r.tet, 100*r.gauss, 100*r.gbest, r.bestFactor)
			for name, v := range map[string]float64{"tetrahedra": r.tet, "Gaussian (default width)": r.gauss, "Gaussian (best width)": r.gbest} {
				if _, ok := first[name]; !ok && v <= 0.01 {
					first[name] = r.points
				}
			}
		}
		fmt.Fprintf(&report, "\nq-points needed for 1 %% (L1):")
		for _, name := range []string{"tetrahedra", "Gaussian (default width)", "Gaussian (best width)"} {
			if p, ok := first[name]; ok {
				fmt.Fprintf(&report, " %s %d;", name, p)
			} else {
				fmt.Fprintf(&report, " %s > %d;", name, rows[len(rows)-1].points)
			}
		}
		fmt.Fprintln(&report)
		tp, tok := first["tetrahedra"]
		gp, gok := first["Gaussian (default width)"]
		if !tok {
			t.Errorf("%s: tetrahedra never reach 1 %%", title)
		}
		if tok && gok && tp > gp {
			t.Errorf("%s: tetrahedra need %d points, Gaussian %d", title, tp, gp)
		}
	}

	// 1D: the monatomic chain against its closed form.
	m := testmodels.Compile(t, testmodels.Load(t, "chain"))
	step := 1.05 * testmodels.ChainNuMaxTHz / 200
	window := DOSOptions{Max: 1.05 * testmodels.ChainNuMaxTHz, Step: step}
	var ref []float64
	for i := 0; i <= 200; i++ {
		f := float64(i) * step
		ref = append(ref, (chainStatesBelow(f+step/2)-chainStatesBelow(f-step/2))/step)
	}
	var rows []convRow
	for n := 8; n <= 1<<16; n *= 2 {
		g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{n}}, physics.GridOptions{})
		rows = append(rows, gaussRow(t, m, g, window, ref, factors, n, n))
		rows[len(rows)-1].tet = convergenceL1(mustDOS(t, m, g, window).DOS, ref)
	}
	study("1D monatomic chain (reference: closed form)", rows)

	// 3D: the rock-salt-like and fcc examples against 128³ tetrahedron DOS.
	for _, name := range []string{"rocksalt-like", "fcc"} {
		m = testmodels.Compile(t, testmodels.Load(t, name))
		big := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{128, 128, 128}}, physics.GridOptions{})
		top := Stats(big).MaxTHz
		window = DOSOptions{Max: 1.05 * top, Step: 1.05 * top / 200}
		ref = mustDOS(t, m, big, window).DOS
		check := mustDOS(t, m, testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{96, 96, 96}}, physics.GridOptions{}), window).DOS
		big = nil
		fmt.Fprintf(&report, "\n(%s reference check: tetrahedra on 96³ differ from 128³ by %.2g %% L1.)\n", name, 100*convergenceL1(check, ref))
		rows = nil
		for _, n := range []int{4, 6, 8, 12, 16, 24, 32, 48, 64, 96} {
			g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{n, n, n}}, physics.GridOptions{})
			r := gaussRow(t, m, g, window, ref, factors, n, n*n*n)
			r.tet = convergenceL1(mustDOS(t, m, g, window).DOS, ref)
			rows = append(rows, r)
		}
		study(fmt.Sprintf("3D %s example (reference: tetrahedra on 128³)", name), rows)
	}
	t.Log(report.String())
}

// convRow is one grid of the convergence study: relative L1 errors of the
// tetrahedron DOS, the Gaussian at the default width and at the best width
// (bestFactor times the default).
type convRow struct {
	n, points         int
	tet, gauss, gbest float64
	bestFactor        float64
}

// gaussRow measures the Gaussian DOS of g at its default width and at the
// best of the given multiples of it.
func gaussRow(t *testing.T, m *physics.Model, g *physics.GridModes, window DOSOptions, ref, factors []float64, n, points int) convRow {
	r := convRow{n: n, points: points, gbest: math.Inf(1)}
	def := defaultGaussianWidth(Stats(g).MaxTHz, g.Spec.Mesh, m.Dim())
	for _, f := range factors {
		opt := window
		opt.Method, opt.Width = Gaussian, f*def
		l1 := convergenceL1(mustDOS(t, m, g, opt).DOS, ref)
		if f == 1 {
			r.gauss = l1
		}
		if l1 < r.gbest {
			r.gbest, r.bestFactor = l1, f
		}
	}
	return r
}
