package main

// The demo's heat section: the rock-salt-like example's thermal expansion
// (quasi-harmonic) and its lattice thermal conductivity for three sample
// sizes. The volumes are the example scaled, its springs scaled as V^(−3)
// (every mode γ = 1.5), and the static energies a Birch–Murnaghan curve
// chosen by hand: all invented, to show the commands, not a real material.

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"

	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/client"
	"github.com/materials-lab/modegrid/proto/examples"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// demoHeatExample is the crystal of the heat section.
const demoHeatExample = "rocksalt-like"

// demoHeatStrains are the invented linear strains of the volumes.
var demoHeatStrains = []float64{-0.02, -0.01, 0, 0.01, 0.02, 0.03}

// scaledCrystal is c with its cell scaled by 1+d and its springs by
// (1+d)^(−3s) (k ∝ V^(−s): every mode's γ is s/2).
func scaledCrystal(c *modegridv1.Crystal, d, s float64) *modegridv1.Crystal {
	out := proto.Clone(c).(*modegridv1.Crystal)
	f := math.Pow(1+d, -3*s)
	for _, v := range out.GetLattice() {
		v.X, v.Y, v.Z = v.X*(1+d), v.Y*(1+d), v.Z*(1+d)
	}
	for _, sh := range out.GetShells() {
		sh.KLong, sh.KTrans = sh.KLong*f, sh.KTrans*f
	}
	for _, sp := range out.GetSprings() {
		sp.KLong, sp.KTrans = sp.KLong*f, sp.KTrans*f
	}
	out.Name = fmt.Sprintf("%s at %+g %% strain (invented)", c.GetName(), 100*d)
	return out
}

// demoStatic is the invented static energy (eV per cell) at volume v of a
// cell whose unstrained volume is v0: third-order Birch–Murnaghan (Birch,
// Phys. Rev. 71, 809 (1947)), B0 = 0.4 eV/Å³ (64 GPa), B0' = 4.5.
func demoStatic(v, v0 float64) float64 {
	eta := math.Pow(v0/v, 2.0/3)
	return -8 + 9*v0*0.4/16*(math.Pow(eta-1, 3)*4.5+(eta-1)*(eta-1)*(6-4*eta))
}

// demoHeat runs the heat section and writes its four files; it returns
// the summary lines and the number of files.
func demoHeat(ctx context.Context, cl *client.Client, e *env, dir, kind string, grid uint32) ([]string, int, error) {
	base, err := examples.Load(demoHeatExample)
	if err != nil {
		return nil, 0, err
	}
	if grid == 0 {
		grid = 16
	}
	mesh := &modegridv1.QPointSet{Set: &modegridv1.QPointSet_Grid{Grid: &modegridv1.MonkhorstPackGrid{Mesh: []uint32{grid, grid, grid}}}}
	lat := base.GetLattice()
	v0 := math.Abs(lat[0].GetX()*(lat[1].GetY()*lat[2].GetZ()-lat[1].GetZ()*lat[2].GetY()) - lat[0].GetY()*(lat[1].GetX()*lat[2].GetZ()-lat[1].GetZ()*lat[2].GetX()) +
		lat[0].GetZ()*(lat[1].GetX()*lat[2].GetY()-lat[1].GetY()*lat[2].GetX()))
	qreq := &modegridv1.ComputeQuasiHarmonicRequest{Qpoints: mesh, Range: &modegridv1.TemperatureRange{StartK: 0, StopK: 800, StepK: 20}}
	for _, d := range demoHeatStrains {
		qreq.Models = append(qreq.Models, client.Inline(scaledCrystal(base, d, 3)))
		qreq.StaticEnergiesEv = append(qreq.StaticEnergiesEv, demoStatic(v0*math.Pow(1+d, 3), v0))
	}
	done := e.prog.running("demo: thermal expansion of " + demoHeatExample)
	qha, err := cl.QuasiHarmonic(ctx, qreq)
	done()
	if err != nil {
		return nil, 0, err
	}
	creq := &modegridv1.ComputeConductivityRequest{Model: client.Inline(base), Qpoints: mesh,
		Range:        &modegridv1.TemperatureRange{StartK: 5, StopK: 800, StepK: 5},
		Samples:      []*modegridv1.SampleGeometry{{Kind: modegridv1.SampleKind_SAMPLE_KIND_GRAIN, SizeM: 50e-9}, {Kind: modegridv1.SampleKind_SAMPLE_KIND_GRAIN, SizeM: 1e-6}, {Kind: modegridv1.SampleKind_SAMPLE_KIND_GRAIN, SizeM: 1e-3}},
		PointDefects: &modegridv1.PointDefectScattering{Enabled: true, SiteG2: []float64{3e-4, 3e-4}},
		Umklapp:      &modegridv1.UmklappScattering{Enabled: true, Gruneisen: 1.5}}
	done = e.prog.running("demo: thermal conductivity of " + demoHeatExample + " for three sample sizes")
	kap, err := cl.Conductivity(ctx, creq)
	done()
	if err != nil {
		return nil, 0, err
	}
	files, err := writeDemoHeat(dir, kind, qha, kap)
	return demoHeatLines(qha, kap), files, err
}

// writeDemoHeat writes the tables and figures of the heat section.
func writeDemoHeat(dir, kind string, qha *modegridv1.ComputeQuasiHarmonicResponse, kap *modegridv1.ComputeConductivityResponse) (int, error) {
	base := filepath.Join(dir, "heat-"+demoHeatExample)
	write := func(file string, fn func(io.Writer) error) error {
		f, err := os.Create(file)
		if err != nil {
			return err
		}
		if err := fn(f); err != nil {
			f.Close()
			return err
		}
		return f.Close()
	}
	title := demoHeatExample + " (invented volumes and energies)"
	steps := []func() error{
		func() error {
			return write(base+"-expansion.csv", func(w io.Writer) error { return writeQHA(w, "csv", qha, false) })
		},
		func() error { return qhaFigure{r: qha, title: title}.write(base+"-expansion."+kind, kind) },
		func() error {
			return write(base+"-conductivity.csv", func(w io.Writer) error { return writeConductivity(w, "csv", kap, false) })
		},
		func() error {
			return kappaFigure{r: kap, title: demoHeatExample + " (invented scattering constants)"}.write(base+"-conductivity."+kind, kind)
		},
	}
	for i, s := range steps {
		if err := s(); err != nil {
			return i, err
		}
	}
	return len(steps), nil
}

// demoHeatLines are the summary lines of the heat section: α_L, B_T and
// Cp at 300 K, and κ at 300 K of each sample.
func demoHeatLines(qha *modegridv1.ComputeQuasiHarmonicResponse, kap *modegridv1.ComputeConductivityResponse) []string {
	var out []string
	for _, p := range qha.GetPoints() {
		if p.GetTemperatureK() == 300 {
			out = append(out, fmt.Sprintf("%s at 300 K (invented volumes and energies): αL %.3g /K, B_T %.1f GPa, Cp %.3f J/(K·mol atoms), γ %.3f",
				demoHeatExample, p.GetLinearExpansionPerK(), p.GetBulkModulusGpa(), p.GetHeatCapacityPJPerMolAtomsK(), p.GetGruneisen()))
		}
	}
	line := demoHeatExample + " κ(300 K) (invented scattering constants):"
	for _, s := range kap.GetSeries() {
		for _, p := range s.GetPoints() {
			if p.GetTemperatureK() == 300 {
				line += fmt.Sprintf(" %s %.3g W/(m·K);", sampleName(s.GetSample()), p.GetKappaMeanWPerMK())
			}
		}
	}
	return append(out, line[:len(line)-1])
}
