package server

import (
	"math"
	"testing"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// twoChainProto is a diatomic chain (a = 4 Å, p = 1) of masses m1 and m2
// amu joined by springs of K = 1 eV/Å².
func twoChainProto(m1, m2 float64) *modegridv1.Crystal {
	return &modegridv1.Crystal{
		Lattice:       []*modegridv1.Vec3{{X: 4}},
		Polarizations: 1,
		Sites: []*modegridv1.Site{
			{Label: "A", MassAmu: m1, Frac: []float64{0}},
			{Label: "B", MassAmu: m2, Frac: []float64{0.5}},
		},
		Springs: []*modegridv1.Spring{
			{FromSite: 0, ToSite: 1, Cell: []int32{0}, KLong: 1},
			{FromSite: 1, ToSite: 0, Cell: []int32{1}, KLong: 1},
		},
	}
}

// TestNearbyModelsComputedApart: chains of masses (1, 1e6) and (1.00005,
// 1e6) amu sent one after the other to one server have distinct model
// hashes, and each gets its own optical frequency at the zone boundary X,
// ν = sqrt(2K/m₁), and its own largest frequency, at Γ, sqrt(2K(1/m₁ +
// 1/m₂)) (diatomic chain with m₁ < m₂; Ashcroft & Mermin, Solid State
// Physics, ch. 22), from every call, cached by hash or not: the
// second is computed, not served from the first's cache entries (a hash
// rounded to 33 bits gave both chains one hash, and the second chain the
// first's 22.108830881 THz instead of 22.108278181).
func TestNearbyModelsComputedApart(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	// ν [THz] = sqrt(λ [eV/Å²/amu]) · sqrt(e/(1e-20 m_u)) / (2π · 1e12)
	// with e = 1.602176634e-19 C and m_u = 1.66053906660e-27 kg (CODATA 2018).
	unit := math.Sqrt(1.602176634e-19/(1e-20*1.66053906660e-27)) / (2 * math.Pi * 1e12)
	hashes := map[string]float64{}
	for _, m1 := range []float64{1, 1.00005} {
		want := math.Sqrt(2*1/m1) * unit
		top := math.Sqrt(2*1*(1/m1+1/1e6)) * unit
		model := inline(twoChainProto(m1, 1e6))
		chunks, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: model, Qpoints: qlist(0.5)})
		if err != nil {
			t.Fatal(err)
		}
		h := chunks[0].GetModelHash()
		if prev, ok := hashes[h]; ok {
			t.Errorf("m₁ = %v and m₁ = %v share the model hash %s", prev, m1, h)
		}
		hashes[h] = m1
		disp, err := ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: model, Points: 2,
			Path: []*modegridv1.PathPoint{{Label: "G", Q: &modegridv1.QPoint{}}, {Label: "X", Q: &modegridv1.QPoint{Q1: 0.5}}}})
		if err != nil {
			t.Fatal(err)
		}
		check, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: model})
		if err != nil {
			t.Fatal(err)
		}
		for _, got := range []struct {
			call     string
			nu, want float64
		}{
			{"ComputeModes at X", allPoints(chunks)[0].GetFrequencies()[1], want},
			{"ComputeDispersion at X", disp.GetSamples()[1].GetFrequencies()[1], want},
			{"CheckModel, largest", check.GetMaxFrequencyThz(), top},
		} {
			if math.Abs(got.nu-got.want) > 1e-12*got.want {
				t.Errorf("m₁ = %v: %s %.12g THz; want %.12g", m1, got.call, got.nu, got.want)
			}
		}
		t.Logf("m₁ = %v amu: hash %.12s…, ν(X) = %.9f THz", m1, h, disp.GetSamples()[1].GetFrequencies()[1])
	}
}

// TestNearbyParametersComputedApart: requests whose real-valued parameters
// differ by one part in 1e12 have different canonical parameters (so
// different cache keys), and each answer echoes its own exact value.
func TestNearbyParametersComputedApart(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	chain := inline(twoChainProto(10, 20))
	nudge := func(x float64) float64 { return x * (1 + 1e-12) }
	cases := []struct {
		name string
		call func(x float64) (params string, echo float64, err error)
		x    float64
	}{
		{"temperature", func(x float64) (string, float64, error) {
			r, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: chain, Qpoints: mpGrid(false, 8), TemperaturesK: []float64{x}})
			return r.GetParameters(), r.GetPoints()[0].GetTemperatureK(), err
		}, 300},
		{"range start", func(x float64) (string, float64, error) {
			r, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: chain, Qpoints: mpGrid(false, 8),
				Range: &modegridv1.TemperatureRange{StartK: x, StopK: 400, StepK: 50}})
			return r.GetParameters(), r.GetPoints()[0].GetTemperatureK(), err
		}, 100},
		{"path corner", func(x float64) (string, float64, error) {
			r, err := ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: chain, Points: 3,
				Path: []*modegridv1.PathPoint{{Label: "G", Q: &modegridv1.QPoint{}}, {Label: "X", Q: &modegridv1.QPoint{Q1: x}}}})
			s := r.GetSamples()
			return r.GetParameters(), s[len(s)-1].GetQ().GetQ1(), err
		}, 0.5},
		{"dispersion spacing", func(x float64) (string, float64, error) {
			r, err := ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: chain, SpacingInvA: x,
				Path: []*modegridv1.PathPoint{{Label: "G", Q: &modegridv1.QPoint{}}, {Label: "X", Q: &modegridv1.QPoint{Q1: 0.5}}}})
			return r.GetParameters(), x, err
		}, 0.1},
		{"DOS width", func(x float64) (string, float64, error) {
			r, err := ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: chain, Qpoints: mpGrid(false, 16),
				Method: modegridv1.DosMethod_DOS_METHOD_GAUSSIAN, Width: x})
			return r.GetParameters(), x, err
		}, 0.2},
		{"DOS window", func(x float64) (string, float64, error) {
			r, err := ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: chain, Qpoints: mpGrid(false, 16), Min: x, Max: 10, Step: 0.5})
			return r.GetParameters(), r.GetFrequencies()[0], err
		}, 1},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			seen := map[string]bool{}
			for _, x := range []float64{tc.x, nudge(tc.x)} {
				p, echo, err := tc.call(x)
				if err != nil {
					t.Fatal(err)
				}
				if seen[p] {
					t.Fatalf("%v shares the parameters %q with %v", x, p, tc.x)
				}
				seen[p] = true
				if echo != x {
					t.Errorf("asked for %v, the answer is for %v", x, echo)
				}
			}
		})
	}
}

// TestCheckDescriptionFields: a shell and its explicit springs, or the
// same model with an added zero spring, share a hash (and the cached
// summary), yet each CheckModel answer counts the interactions and lists
// the shells of the model as that request gave it.
func TestCheckDescriptionFields(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	withShell := twoChainProto(10, 20)
	withShell.Springs = withShell.Springs[:0]
	withShell.Shells = []*modegridv1.Shell{{FromLabel: "A", ToLabel: "B", Shell: 1, KLong: 1}}
	withZero := twoChainProto(10, 20)
	withZero.Springs = append(withZero.Springs, &modegridv1.Spring{FromSite: 0, ToSite: 0, Cell: []int32{3}})
	var hash string
	for _, tc := range []struct {
		name         string
		c            *modegridv1.Crystal
		interactions uint32
		shells       int
	}{{"springs", twoChainProto(10, 20), 2, 0}, {"shell", withShell, 2, 1}, {"springs and a zero spring", withZero, 3, 0}} {
		r, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: inline(tc.c)})
		if err != nil {
			t.Fatal(err)
		}
		if hash == "" {
			hash = r.GetModelHash()
		} else if r.GetModelHash() != hash {
			t.Errorf("%s: hash %s; want %s (the same model)", tc.name, r.GetModelHash(), hash)
		}
		if r.GetInteractions() != tc.interactions || len(r.GetShells()) != tc.shells {
			t.Errorf("%s: %d interactions, %d shells; want %d, %d", tc.name, r.GetInteractions(), len(r.GetShells()), tc.interactions, tc.shells)
		}
		if tc.shells == 1 && len(r.GetShells()) == 1 && r.GetShells()[0].GetBonds() != 2 {
			t.Errorf("%s: shell of %d bonds; want 2", tc.name, r.GetShells()[0].GetBonds())
		}
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_computations_total", map[string]string{"kind": kindCheck}); n != 1 {
		t.Errorf("check computations %v; want 1 (one model)", n)
	}
}
