package server

import (
	"math"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// scaledFCC is the fcc example with its cell scaled by (1+d) in every
// direction and its springs by V^(−s) relative to the example: every mode
// then has γ = s/2 (ω² ∝ k, derived in physics/thermo/qha's tests).
func scaledFCC(t testing.TB, d, s float64) *modegridv1.Crystal {
	c := proto.Clone(example(t, "fcc")).(*modegridv1.Crystal)
	f := math.Pow(math.Pow(1+d, 3), -s)
	for _, v := range c.GetLattice() {
		v.X, v.Y, v.Z = v.X*(1+d), v.Y*(1+d), v.Z*(1+d)
	}
	for _, sh := range c.GetShells() {
		sh.KLong, sh.KTrans = sh.KLong*f, sh.KTrans*f
	}
	return c
}

// bmStatic is a third-order Birch–Murnaghan energy (Birch 1947) with
// V0 = 32 Å³ (the example's cell), B0 = 0.5 eV/Å³ and B0' = 4.5, eV.
func bmStatic(v float64) float64 {
	eta := math.Pow(32/v, 2.0/3)
	return -4 + 9*32*0.5/16*(math.Pow(eta-1, 3)*4.5+(eta-1)*(eta-1)*(6-4*eta))
}

func volumeModels(t testing.TB, s float64, dx ...float64) ([]*modegridv1.ModelSource, []float64) {
	var ms []*modegridv1.ModelSource
	var e []float64
	for _, d := range dx {
		ms = append(ms, inline(scaledFCC(t, d, s)))
		e = append(e, bmStatic(32*math.Pow(1+d, 3)))
	}
	return ms, e
}

func TestGruneisenOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	const s = 3.0
	models, _ := volumeModels(t, s, 0.02, -0.02, 0) // out of volume order
	resp, err := ts.api.ComputeGruneisen(ctx, &modegridv1.ComputeGruneisenRequest{Models: models, Qpoints: mpGrid(false, 4, 4, 4),
		TemperaturesK: []float64{0, 300}})
	if err != nil {
		t.Fatal(err)
	}
	if resp.GetReference() != 2 || len(resp.GetPoints()) != 64 || !(resp.GetVolumesA3()[0] > resp.GetVolumesA3()[2]) {
		t.Fatalf("reference %d, %d points, volumes %v", resp.GetReference(), len(resp.GetPoints()), resp.GetVolumesA3())
	}
	for _, p := range resp.GetPoints() {
		for k, g := range p.GetGamma() {
			if p.GetDefined()[k] && math.Abs(g-s/2) > 1e-9 {
				t.Fatalf("γ = %v at %v, want %g", g, p.GetQ(), s/2)
			}
		}
	}
	if a := resp.GetAverages(); len(a) != 2 || a[0].GetDefined() || math.Abs(a[1].GetGamma()-s/2) > 1e-9 {
		t.Errorf("averages %v", a)
	}
	path, err := ts.api.ComputeGruneisen(ctx, &modegridv1.ComputeGruneisenRequest{Models: models, PathPoints: 11,
		Path: []*modegridv1.PathPoint{{Label: "G"}, {Label: "X"}}})
	if err != nil {
		t.Fatal(err)
	}
	if n := len(path.GetPoints()); n != 11 || path.GetPoints()[10].GetLabel() != "X" || path.GetMinOverlap() < 0.999 {
		t.Errorf("path: %d points, last label %q, overlap %g", n, path.GetPoints()[n-1].GetLabel(), path.GetMinOverlap())
	}
}

func TestQuasiHarmonicOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	const s = 3.0
	models, e := volumeModels(t, s, -0.02, -0.01, 0, 0.01, 0.02, 0.03)
	req := &modegridv1.ComputeQuasiHarmonicRequest{Models: models, StaticEnergiesEv: e, Qpoints: mpGrid(false, 8, 8, 8),
		Range: &modegridv1.TemperatureRange{StartK: 0, StopK: 600, StepK: 200}, Eos: modegridv1.EquationOfState_EQUATION_OF_STATE_BIRCH_MURNAGHAN}
	resp, err := ts.api.ComputeQuasiHarmonic(ctx, req)
	if err != nil {
		t.Fatal(err)
	}
	if len(resp.GetPoints()) != 4 || resp.GetUnbracketed() != 0 {
		t.Fatalf("%d points, %d unbracketed", len(resp.GetPoints()), resp.GetUnbracketed())
	}
	for _, p := range resp.GetPoints()[1:] {
		if !p.GetBracketed() || p.GetHeatCapacityPJPerMolK() <= p.GetHeatCapacityVJPerMolK() || math.Abs(p.GetGruneisen()-s/2) > 0.01*s/2 {
			t.Errorf("T = %g K: %v", p.GetTemperatureK(), p)
		}
	}
	if p := resp.GetPoints()[0]; p.GetVolumeExpansionPerK() != 0 || p.GetGruneisenDefined() {
		t.Errorf("T = 0: α = %g, γ defined %v", p.GetVolumeExpansionPerK(), p.GetGruneisenDefined())
	}
	// Cached: the same request again computes nothing.
	before := metric(t, ts.srv.reg, "modegrid_computations_total", map[string]string{"kind": kindQHA})
	if _, err := ts.api.ComputeQuasiHarmonic(ctx, req); err != nil {
		t.Fatal(err)
	}
	if after := metric(t, ts.srv.reg, "modegrid_computations_total", map[string]string{"kind": kindQHA}); after != before {
		t.Errorf("quasi-harmonic computations %v → %v on a repeated request", before, after)
	}
}

// γ per mode from models at other volumes equals the crystal value s/2 of
// the power-law crystal, so κ with either must agree.
func TestConductivityOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	const s = 3.0
	others, _ := volumeModels(t, s, -0.01, 0.01)
	base := &modegridv1.ComputeConductivityRequest{Model: inline(example(t, "fcc")), Qpoints: mpGrid(false, 6, 6, 6),
		TemperaturesK: []float64{100, 300},
		Samples: []*modegridv1.SampleGeometry{{Kind: modegridv1.SampleKind_SAMPLE_KIND_FILM, SizeM: 1e-7, Normal: &modegridv1.Vec3{Z: 1}},
			{Kind: modegridv1.SampleKind_SAMPLE_KIND_GRAIN, SizeM: 1e-6}, {}},
		PointDefects:           &modegridv1.PointDefectScattering{Enabled: true, SiteG2: []float64{2e-4}},
		Umklapp:                &modegridv1.UmklappScattering{Enabled: true, Gruneisen: s / 2},
		CumulativeTemperatureK: 300}
	a, err := ts.api.ComputeConductivity(ctx, base)
	if err != nil {
		t.Fatal(err)
	}
	withModels := proto.Clone(base).(*modegridv1.ComputeConductivityRequest)
	withModels.Umklapp = &modegridv1.UmklappScattering{Enabled: true, VolumeModels: others}
	b, err := ts.api.ComputeConductivity(ctx, withModels)
	if err != nil {
		t.Fatal(err)
	}
	if len(a.GetSeries()) != 3 || a.GetSeries()[2].GetSample().GetKind() != modegridv1.SampleKind_SAMPLE_KIND_UNSPECIFIED {
		t.Fatalf("series %v", a.GetSeries())
	}
	for i, se := range a.GetSeries() {
		for j, p := range se.GetPoints() {
			q := b.GetSeries()[i].GetPoints()[j]
			if math.Abs(p.GetKappaMeanWPerMK()/q.GetKappaMeanWPerMK()-1) > 1e-6 {
				t.Errorf("series %d T %g: κ %g with γ = s/2, %g with γ from volumes", i, p.GetTemperatureK(), p.GetKappaMeanWPerMK(), q.GetKappaMeanWPerMK())
			}
		}
		if c := se.GetCumulative(); len(c.GetMeanFreePathM()) != 100 {
			t.Errorf("cumulative %d points", len(c.GetMeanFreePathM()))
		}
	}
	film, grain, bulk := a.GetSeries()[0].GetPoints()[1], a.GetSeries()[1].GetPoints()[1], a.GetSeries()[2].GetPoints()[1]
	if !(film.GetKappaMeanWPerMK() < grain.GetKappaMeanWPerMK() && grain.GetKappaMeanWPerMK() < bulk.GetKappaMeanWPerMK()) {
		t.Errorf("κ(300 K): film 100 nm %g, grain 1 µm %g, bulk %g: want increasing", film.GetKappaMeanWPerMK(), grain.GetKappaMeanWPerMK(), bulk.GetKappaMeanWPerMK())
	}
	t.Logf("κ(300 K): film %.4g, grain %.4g, bulk %.4g W/(m·K); θ %.1f K, v̄ %.3f km/s", film.GetKappaMeanWPerMK(), grain.GetKappaMeanWPerMK(), bulk.GetKappaMeanWPerMK(), a.GetUmklappThetaK(), a.GetUmklappVelocityKmS())
}

// Every bad field of a heat request is named at once.
func TestHeatBadInputs(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	models, e := volumeModels(t, 3, -0.02, -0.01, 0, 0.01)
	bad := proto.Clone(models[1]).(*modegridv1.ModelSource)
	bad.GetCrystal().GetSites()[0].MassAmu = -1
	models[1] = bad
	_, err := ts.api.ComputeQuasiHarmonic(ctx, &modegridv1.ComputeQuasiHarmonicRequest{Models: models, StaticEnergiesEv: e[:3],
		Qpoints: mpGrid(false, 4, 4, 4), TemperaturesK: []float64{-1}, Eos: 9, PressureGpa: math.NaN()})
	got := badFields(t, err)
	for _, f := range []string{"models", "static_energies_ev", "temperatures_k[0]", "eos", "pressure_gpa"} {
		if _, ok := got[f]; !ok {
			t.Errorf("quasi-harmonic: no violation of %s in %v", f, got)
		}
	}
	_, err = ts.api.ComputeQuasiHarmonic(ctx, &modegridv1.ComputeQuasiHarmonicRequest{Models: append(models, models[0]), StaticEnergiesEv: append(e, 1),
		Qpoints: mpGrid(false, 4, 4, 4), TemperaturesK: []float64{1}})
	got = badFields(t, err)
	if _, ok := got["models[1].crystal.sites[0].mass_amu"]; !ok {
		t.Errorf("quasi-harmonic: a bad model's field path missing from %v", got)
	}
	_, err = ts.api.ComputeConductivity(ctx, &modegridv1.ComputeConductivityRequest{Model: inline(example(t, "fcc")), Qpoints: mpGrid(false, 4, 4, 4),
		TemperaturesK: []float64{300}, Samples: []*modegridv1.SampleGeometry{{Kind: modegridv1.SampleKind_SAMPLE_KIND_FILM, SizeM: -1}, {Kind: 9}},
		PointDefects: &modegridv1.PointDefectScattering{Enabled: true}, Umklapp: &modegridv1.UmklappScattering{Enabled: true, GruneisenPerBranch: []float64{1}},
		PowerLaw: &modegridv1.PowerLawScattering{Enabled: true, Exponent: 99}})
	got = badFields(t, err)
	for _, f := range []string{"samples[0].size_m", "samples[0].normal", "samples[1].kind", "power_law.exponent", "umklapp.gruneisen_per_branch", "point_defects.site_g2"} {
		if _, ok := got[f]; !ok {
			t.Errorf("conductivity: no violation of %s in %v", f, got)
		}
	}
	t.Logf("point_defects.site_g2: %s", got["point_defects.site_g2"])
	_, err = ts.api.ComputeGruneisen(ctx, &modegridv1.ComputeGruneisenRequest{Models: models[:1]})
	if _, ok := badFields(t, err)["models"]; !ok {
		t.Errorf("one model accepted: %v", err)
	}
	chain := inline(example(t, "chain"))
	_, err = ts.api.ComputeConductivity(ctx, &modegridv1.ComputeConductivityRequest{Model: chain, Qpoints: mpGrid(false, 4), TemperaturesK: []float64{300},
		PowerLaw: &modegridv1.PowerLawScattering{Enabled: true, RatePerS: 1e9}})
	if _, ok := badFields(t, err)["model"]; !ok {
		t.Errorf("a chain's conductivity: %v", err)
	}
}

// A grid too large for the memory budget is refused before any work.
func TestHeatRefusedBeforeWork(t *testing.T) {
	ts := startServer(t, Config{MemoryBudget: 64 << 20})
	ctx := testContext(t)
	_, err := ts.api.ComputeConductivity(ctx, &modegridv1.ComputeConductivityRequest{Model: inline(example(t, "rocksalt-like")), Qpoints: mpGrid(false, 100, 100, 100),
		TemperaturesK: []float64{300}, PowerLaw: &modegridv1.PowerLawScattering{Enabled: true, RatePerS: 1e9}})
	if f := badFields(t, err); f["qpoints"] == "" {
		t.Fatalf("refusal %v", f)
	}
	if n := metric(t, ts.srv.reg, "modegrid_computations_total", map[string]string{"kind": kindConductivity}); n > 0 {
		t.Errorf("%v conductivity computations after a refusal", n)
	}
	_ = status.Code(err) == codes.InvalidArgument
}

// New inline models whose request could never fit are refused before any
// of them is compiled (precompile.go's lower bound).
func TestHeatRefusedBeforeCompile(t *testing.T) {
	ts := startServer(t, Config{MemoryBudget: 64 << 20})
	ctx := testContext(t)
	models, e := volumeModels(t, 3, -0.02, -0.01, 0, 0.01, 0.02)
	_, err := ts.api.ComputeQuasiHarmonic(ctx, &modegridv1.ComputeQuasiHarmonicRequest{Models: models, StaticEnergiesEv: e,
		Qpoints: mpGrid(false, 120, 120, 120), TemperaturesK: []float64{300}})
	if f := badFields(t, err); !strings.Contains(f["qpoints"], "at least") {
		t.Fatalf("refusal %v", f)
	}
	_, err = ts.api.ComputeGruneisen(ctx, &modegridv1.ComputeGruneisenRequest{Models: models, Qpoints: mpGrid(false, 150, 150, 150)})
	if f := badFields(t, err); !strings.Contains(f["qpoints"], "at least") {
		t.Fatalf("refusal %v", f)
	}
	if n := metric(t, ts.srv.reg, "modegrid_computations_total", map[string]string{"kind": kindCompile}); n > 0 {
		t.Errorf("%v compiles before the refusals", n)
	}
}
