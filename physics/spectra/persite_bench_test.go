package spectra

import (
	"bytes"
	"context"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// The per-site DOS at first-principles size: a 64-site crystal on a 12³
// grid and a 128-site crystal on 8³, low symmetry (testmodels.LowSymmetry:
// only the identity and time reversal), Gaussian per-site DOS on a fixed
// window. The same job runs through the CLI and in the numpy reference
// (testdata/persite_dos_numpy.py) by testdata/persite_dos_bench.sh, which
// writes the model files with TestWritePerSiteModels.

var perSiteWrite = flag.String("persite.write", "", "write the per-site DOS benchmark crystals as model files (persite-<sites>.json) into this directory")

// perSiteRuns are the jobs: sites and grid points per direction.
var perSiteRuns = []struct{ sites, grid int }{{64, 12}, {128, 8}}

// The DOS window, bin and width of the jobs, THz (the crystals' highest
// mode is about 13.7 THz): 501 samples.
const (
	perSiteMaxTHz   = 15
	perSiteStepTHz  = 0.03
	perSiteWidthTHz = 0.15
)

// perSiteOptions are the DOS options of the jobs.
func perSiteOptions() DOSOptions {
	return DOSOptions{Method: Gaussian, Min: 0, Max: perSiteMaxTHz, Step: perSiteStepTHz, Width: perSiteWidthTHz, PerSite: true}
}

// BenchmarkPerSiteDOSAtSize times the whole job through the engine, as a
// request runs it: compile the model, find its symmetry, diagonalise the
// irreducible points of the Γ-centred grid (time reversal halves it:
// (N + 8)/2 points of an even N³ grid) with eigenvectors for the site
// weights, unfold, and take the Gaussian per-site DOS. Run with -cpu 1,2
// for one and two cores; it works alike in every build of the eigensolver.
func BenchmarkPerSiteDOSAtSize(b *testing.B) {
	for _, run := range perSiteRuns {
		c := testmodels.LowSymmetry(b, run.sites)
		spec := mesh.GridSpec{Mesh: [3]int{run.grid, run.grid, run.grid}}
		b.Run(fmt.Sprintf("sites=%d/grid=%d", run.sites, run.grid), func(b *testing.B) {
			for b.Loop() {
				r, g := perSiteJob(b, c, spec)
				b.ReportMetric(float64(g.Diagonalized), "diagonalised")
				benchSink = r
			}
		})
	}
}

// perSiteJob runs one job and returns the DOS and the grid modes.
func perSiteJob(t testing.TB, c *physics.Crystal, spec mesh.GridSpec) (*DOSResult, *physics.GridModes) {
	ctx := context.Background()
	m, err := physics.Compile(ctx, c, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	g, err := m.GridModes(ctx, spec, physics.GridOptions{Projections: true})
	if err != nil {
		t.Fatal(err)
	}
	r, err := ComputeDOS(ctx, m, g, perSiteOptions())
	if err != nil {
		t.Fatal(err)
	}
	return r, g
}

// TestWritePerSiteModels writes the benchmark crystals as model files
// when -persite.write names a directory (the harness script does), and
// otherwise checks what the harness relies on: each crystal has only the
// identity (so every implementation diagonalises the same (N + 8)/2
// points) and its model file reads back to the same crystal.
func TestWritePerSiteModels(t *testing.T) {
	for _, run := range perSiteRuns {
		c := testmodels.LowSymmetry(t, run.sites)
		if *perSiteWrite == "" {
			m := testmodels.Compile(t, c)
			if n := len(testmodels.Symmetry(t, m)); n != 1 {
				t.Errorf("%d sites: %d operations; want the identity alone", run.sites, n)
			}
			var buf bytes.Buffer
			if err := testmodels.WriteModelJSON(&buf, c); err != nil {
				t.Fatal(err)
			}
			back := testmodels.Compile(t, testmodels.Decode(t, "written", buf.Bytes()))
			if back.Hash() != m.Hash() {
				t.Errorf("%d sites: the model file compiles to another model", run.sites)
			}
			continue
		}
		path := filepath.Join(*perSiteWrite, fmt.Sprintf("persite-%d.json", run.sites))
		f, err := os.Create(path)
		if err != nil {
			t.Fatal(err)
		}
		if err := testmodels.WriteModelJSON(f, c); err != nil {
			t.Fatal(err)
		}
		if err := f.Close(); err != nil {
			t.Fatal(err)
		}
		t.Logf("wrote %s", path)
	}
}
