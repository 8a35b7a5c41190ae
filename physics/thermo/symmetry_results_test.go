package thermo

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// relEqual compares a and b to rel relative to the largest magnitude of the
// series (values near a series' zero are compared on that scale).
func relEqual(t *testing.T, what string, a, b []float64, rel float64) {
	t.Helper()
	if len(a) != len(b) {
		t.Fatalf("%s: lengths %d vs %d", what, len(a), len(b))
	}
	var top float64
	for _, x := range a {
		top = math.Max(top, math.Abs(x))
	}
	for i := range a {
		if math.Abs(a[i]-b[i]) > rel*top+1e-300 {
			t.Fatalf("%s[%d]: reduced %.15g, full %.15g (scale %g)", what, i, a[i], b[i], top)
		}
	}
}

// TestReducedResultsEqualFull: the DOS (every method, per site and per
// label) and every thermal quantity computed from a symmetry-reduced grid
// equal those from the full grid to 1e-10 relative — on every example, the
// triclinic model (time reversal only) and the cubic model with one
// symmetry-breaking spring. Reduction is exact (no physics approximation),
// so only rounding may differ (common practice).
func TestReducedResultsEqualFull(t *testing.T) {
	type tc struct {
		name string
		c    *physics.Crystal
		n    int
	}
	var cases []tc
	for _, name := range testmodels.Names(t) {
		n := 64
		switch len(testmodels.Load(t, name).Lattice) {
		case 2:
			n = 16
		case 3:
			n = 8
		}
		cases = append(cases, tc{name, testmodels.Load(t, name), n})
	}
	cases = append(cases, tc{"triclinic", testmodels.Triclinic(), 6}, tc{"fcc+bond", testmodels.BrokenFCC(t), 8})
	ctx := context.Background()
	temps := []float64{0, 1, 10, 50, 300, 1000}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			m := testmodels.Compile(t, c.c)
			var msh [3]int
			for k := range msh {
				msh[k] = 1
				if k < m.Dim() {
					msh[k] = c.n
				}
			}
			opt := physics.GridOptions{Projections: true, SiteTensors: true, Eigenvectors: true}
			red, err := m.GridModes(ctx, mesh.GridSpec{Mesh: msh}, opt)
			if err != nil {
				t.Fatal(err)
			}
			opt.NoSymmetry = true
			full, err := m.GridModes(ctx, mesh.GridSpec{Mesh: msh}, opt)
			if err != nil {
				t.Fatal(err)
			}
			for _, meth := range []spectra.DOSMethod{spectra.Tetrahedron, spectra.Gaussian, spectra.Histogram} {
				for _, perSite := range []bool{false, true} {
					o := spectra.DOSOptions{Method: meth, PerSite: perSite}
					a, err := spectra.ComputeDOS(ctx, m, red, o)
					if err != nil {
						t.Fatal(err)
					}
					b, err := spectra.ComputeDOS(ctx, m, full, o)
					if err != nil {
						t.Fatal(err)
					}
					tag := fmt.Sprintf("method %d per-site %v", meth, perSite)
					relEqual(t, tag+" freq", a.Freq, b.Freq, 1e-12)
					relEqual(t, tag+" dos", a.DOS, b.DOS, 1e-10)
					relEqual(t, tag+" integrated", a.Integrated, b.Integrated, 1e-10)
					for s := range a.Sites {
						relEqual(t, fmt.Sprintf("%s site %d", tag, s), a.Sites[s], b.Sites[s], 1e-10)
					}
					for l := range a.LabelDOS {
						relEqual(t, fmt.Sprintf("%s label %d", tag, l), a.LabelDOS[l], b.LabelDOS[l], 1e-10)
					}
				}
			}
			for _, route := range []ThermalRoute{ModeSum, DOSIntegral} {
				o := ThermalOptions{TempsK: temps, Route: route, MSD: true}
				a, err := ComputeThermal(ctx, m, red, o)
				if err != nil {
					t.Fatal(err)
				}
				b, err := ComputeThermal(ctx, m, full, o)
				if err != nil {
					t.Fatal(err)
				}
				relEqual(t, "zpe", []float64{a.ZPEeV}, []float64{b.ZPEeV}, 1e-10)
				for i := range a.Points {
					pa, pb := a.Points[i], b.Points[i]
					tag := fmt.Sprintf("route %d T=%g", route, pa.TempK)
					relEqual(t, tag+" U,F,S,Cv,θ", []float64{pa.UeV, pa.FeV, pa.SeVPerK, pa.CveVPerK, pa.ThetaDK},
						[]float64{pb.UeV, pb.FeV, pb.SeVPerK, pb.CveVPerK, pb.ThetaDK}, 1e-10)
					for s := range pa.MSD {
						relEqual(t, fmt.Sprintf("%s msd site %d", tag, s), pa.MSD[s].U[:], pb.MSD[s].U[:], 1e-10)
					}
				}
			}
		})
	}
}

// TestDOSDeterministic: the DOS and thermal sums are bit-for-bit the same
// whatever the core count (replicas behind one balancer must return
// identical answers; common practice for reproducible services).
func TestDOSDeterministic(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "rocksalt-like"))
	ctx := context.Background()
	run := func(procs int) (*spectra.DOSResult, *spectra.DOSResult, *ThermalResult) {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		g, err := m.GridModes(ctx, mesh.GridSpec{Mesh: [3]int{12, 12, 12}}, physics.GridOptions{Projections: true})
		if err != nil {
			t.Fatal(err)
		}
		a, err := spectra.ComputeDOS(ctx, m, g, spectra.DOSOptions{})
		if err != nil {
			t.Fatal(err)
		}
		b, err := spectra.ComputeDOS(ctx, m, g, spectra.DOSOptions{Method: spectra.Gaussian, PerSite: true})
		if err != nil {
			t.Fatal(err)
		}
		th, err := ComputeThermal(ctx, m, g, ThermalOptions{TempsK: []float64{10, 300}, Route: DOSIntegral})
		if err != nil {
			t.Fatal(err)
		}
		return a, b, th
	}
	a1, b1, t1 := run(1)
	a4, b4, t4 := run(4)
	for i := range a1.DOS {
		if a1.DOS[i] != a4.DOS[i] || a1.Integrated[i] != a4.Integrated[i] {
			t.Fatalf("tetrahedron DOS[%d] differs between 1 and 4 procs: %v vs %v", i, a1.DOS[i], a4.DOS[i])
		}
	}
	for s := range b1.Sites {
		for i := range b1.Sites[s] {
			if b1.Sites[s][i] != b4.Sites[s][i] {
				t.Fatalf("Gaussian site %d DOS[%d] differs: %v vs %v", s, i, b1.Sites[s][i], b4.Sites[s][i])
			}
		}
	}
	for i := range t1.Points {
		if t1.Points[i].CveVPerK != t4.Points[i].CveVPerK || t1.Points[i].FeV != t4.Points[i].FeV {
			t.Fatalf("thermal point %d differs", i)
		}
	}
}
