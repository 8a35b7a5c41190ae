package server

import (
	"context"
	"math"
	"slices"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/physics"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

func byLabel(label string, b float64) *modegridv1.Scatterer {
	return &modegridv1.Scatterer{Target: &modegridv1.Scatterer_Label{Label: label}, CoherentFm: proto.Float64(b)}
}

// TestScatteringFirstMomentOverGRPC: for the one-site fcc example at Q in
// three zones, the lines' first moment Σ E (creation − annihilation) is
// b² e^{−Q·U·Q} ħ²Q²/2M (the f-sum rule of the one-phonon term, Squires,
// Introduction to the Theory of Thermal Neutron Scattering, ch. 3), with U
// and Q as the response reports them; ħ²/(2 m_u Å²) from CODATA 2018.
func TestScatteringFirstMomentOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	const b = 7.0
	req := &modegridv1.ComputeScatteringRequest{
		Model: inline(example(t, "fcc")), Scatterers: []*modegridv1.Scatterer{byLabel("M", b)}, TemperatureK: 200, Lines: true,
		Target: &modegridv1.ComputeScatteringRequest_QList{QList: &modegridv1.QList{Points: []*modegridv1.QVector{{Q1: 0.3, Q2: 0.1, Q3: -0.2}, {Q1: 1.4, Q2: -0.6, Q3: 2.2}}}},
		Frame:  modegridv1.QFrame_Q_FRAME_CONVENTIONAL, ConventionalA: 4,
	}
	resp, err := ts.api.ComputeScattering(testContext(t), req)
	if err != nil {
		t.Fatal(err)
	}
	hbar, mu, e := 6.62607015e-34/(2*math.Pi), 1.66053906660e-27, 1.602176634e-19
	recoil := hbar * hbar / (2 * mu * 1e-20) / e * 1e3 // meV
	u := resp.GetSites()[0].GetUA2()
	for _, p := range resp.GetPoints() {
		q := []float64{p.GetQCartInvA().GetQ1(), p.GetQCartInvA().GetQ2(), p.GetQCartInvA().GetQ3()}
		var twoW, q2 float64
		for a := 0; a < 3; a++ {
			q2 += q[a] * q[a]
			for c := 0; c < 3; c++ {
				twoW += q[a] * u[3*a+c] * q[c]
			}
		}
		want := 0.01 * b * b * recoil * q2 / 60 * math.Exp(-twoW)
		got := 0.0
		for k, en := range p.GetModeEnergies() {
			got += en * (p.GetCreation()[k] - p.GetAnnihilation()[k])
		}
		if math.Abs(got/want-1) > 1e-9 {
			t.Errorf("Q=%v: first moment %.10g, want %.10g", q, got, want)
		}
	}
	if !strings.Contains(resp.GetIntensityUnit(), "barn/(sr·meV)") || len(resp.GetEnergies()) != 201 || !resp.GetDebyeWallerExtrapolated() {
		t.Errorf("unit %q, %d energies, extrapolated %v", resp.GetIntensityUnit(), len(resp.GetEnergies()), resp.GetDebyeWallerExtrapolated())
	}
	// The same request again is served from the cache with the same parameters.
	again, err := ts.api.ComputeScattering(testContext(t), req)
	if err != nil || again.GetParameters() != resp.GetParameters() {
		t.Errorf("second call: %v, parameters %q vs %q", err, again.GetParameters(), resp.GetParameters())
	}
}

// TestScatteringPhaseOverGRPC: the rock-salt-like example with lengths in
// proportion to the masses (25 and 80 amu: 2.5 and 8 fm). At G = (2π/a)(h,
// k, l) the sites scatter with phases 1 and e^{iπ(h+k+l)} (site Q at
// (a/2)(1,1,1)); the optical triplet moves them against each other with
// the centre of mass at rest, so its amplitude ∝ b_P/m_P − e^{iπ(h+k+l)}
// b_Q/m_Q (times √(m_P m_Q/M)) vanishes for h+k+l even and not for odd.
func TestScatteringPhaseOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	req := &modegridv1.ComputeScatteringRequest{
		Model:      inline(example(t, "rocksalt-like")),
		Scatterers: []*modegridv1.Scatterer{byLabel("P", 2.5), byLabel("Q", 8)}, TemperatureK: 300, Lines: true,
		DebyeWaller: &modegridv1.DebyeWaller{Off: true}, // e^{−W} differs per site and would spoil the cancellation
		Target: &modegridv1.ComputeScatteringRequest_Path{Path: &modegridv1.QPath{Points: 11, Corners: []*modegridv1.QPathCorner{
			{Label: "200", Q: &modegridv1.QVector{Q1: 2}}, {Label: "111", Q: &modegridv1.QVector{Q1: 1, Q2: 1, Q3: 1}}}}},
		Frame: modegridv1.QFrame_Q_FRAME_CONVENTIONAL, ConventionalA: 5.6,
	}
	resp, err := ts.api.ComputeScattering(testContext(t), req)
	if err != nil {
		t.Fatal(err)
	}
	pts := resp.GetPoints()
	first, last := pts[0], pts[len(pts)-1]
	opt := func(p *modegridv1.ScatteringPoint) float64 {
		return p.GetCreation()[3] + p.GetCreation()[4] + p.GetCreation()[5]
	}
	if first.GetLabel() != "200" || last.GetLabel() != "111" {
		t.Fatalf("labels %q, %q", first.GetLabel(), last.GetLabel())
	}
	if !(opt(first) < 1e-12*opt(last)) || !(opt(last) > 0) {
		t.Errorf("optical weight at (200) %.3g, at (111) %.3g: want 0 and > 0", opt(first), opt(last))
	}
	for _, p := range pts {
		for _, v := range p.GetS() {
			if v < 0 || math.IsNaN(v) {
				t.Fatalf("S = %v at %v", v, p.GetQFrac())
			}
		}
	}
}

// TestScatteringPowderAndWeightedDOSOverGRPC: a small powder map and a
// weighted DOS of the rock-salt-like example; the normalised weighted DOS
// integrates to sites × p = 6 states (the window holds the spectrum).
func TestScatteringPowderAndWeightedDOSOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	sc := []*modegridv1.Scatterer{byLabel("P", 3), {Target: &modegridv1.Scatterer_Label{Label: "Q"}, CoherentFm: proto.Float64(6), IncoherentBarn: proto.Float64(2)}}
	pw, err := ts.api.ComputeScattering(testContext(t), &modegridv1.ComputeScatteringRequest{
		Model: inline(example(t, "rocksalt-like")), Scatterers: sc, TemperatureK: 100,
		Target: &modegridv1.ComputeScatteringRequest_Powder{Powder: &modegridv1.PowderSpec{QMinInvA: 1, QMaxInvA: 3, QPoints: 3, MaxDirections: 4096}},
		Energy: &modegridv1.EnergyAxis{Max: 40, Step: 0.5}, Resolution: &modegridv1.Resolution{Fwhm: []float64{1.5}, QFwhmInvA: 0.2},
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(pw.GetPowder()) != 3 || len(pw.GetPowder()[0].GetS()) != 81 || pw.GetPowderGroupOrder() != 48 {
		t.Errorf("powder: %d rows of %d, group order %d (want 3 rows of 81, the cubic group m-3m, which holds −1: 48)", len(pw.GetPowder()), len(pw.GetPowder()[0].GetS()), pw.GetPowderGroupOrder())
	}
	if !pw.GetPowderIncoherent() || !slices.Equal(pw.GetPowderIncoherentMesh(), []uint32{24, 24, 24}) {
		t.Errorf("a neutron map holds the incoherent term by default: %v on %v", pw.GetPowderIncoherent(), pw.GetPowderIncoherentMesh())
	}
	// Coherent only: the incoherent term (Q's σ_inc = 2 barn) is what the
	// two maps differ by, and it adds intensity.
	co, err := ts.api.ComputeScattering(testContext(t), &modegridv1.ComputeScatteringRequest{
		Model: inline(example(t, "rocksalt-like")), Scatterers: sc, TemperatureK: 100,
		Target: &modegridv1.ComputeScatteringRequest_Powder{Powder: &modegridv1.PowderSpec{QMinInvA: 1, QMaxInvA: 3, QPoints: 3, MaxDirections: 4096, CoherentOnly: true}},
		Energy: &modegridv1.EnergyAxis{Max: 40, Step: 0.5}, Resolution: &modegridv1.Resolution{Fwhm: []float64{1.5}, QFwhmInvA: 0.2},
	})
	if err != nil {
		t.Fatal(err)
	}
	var withInc, without float64
	for i := range co.GetPowder() {
		for k := range co.GetPowder()[i].GetS() {
			withInc += pw.GetPowder()[i].GetS()[k]
			without += co.GetPowder()[i].GetS()[k]
		}
	}
	if co.GetPowderIncoherent() || !(withInc > without) {
		t.Errorf("coherent only: incoherent %v; summed S %v with the incoherent term, %v without", co.GetPowderIncoherent(), withInc, without)
	}
	wd, err := ts.api.ComputeScattering(testContext(t), &modegridv1.ComputeScatteringRequest{
		Model: inline(example(t, "rocksalt-like")), Scatterers: sc,
		Target: &modegridv1.ComputeScatteringRequest_WeightedDos{WeightedDos: &modegridv1.WeightedDosSpec{Grid: &modegridv1.MonkhorstPackGrid{Mesh: []uint32{16, 16, 16}}}},
		Energy: &modegridv1.EnergyAxis{Max: 60, Step: 0.25},
	})
	if err != nil {
		t.Fatal(err)
	}
	sum := 0.0
	for _, v := range wd.GetWeightedDosNormalized() {
		sum += v * 0.25
	}
	if math.Abs(sum-6) > 1e-3 {
		t.Errorf("normalised weighted DOS integrates to %.6f states, want 6", sum)
	}
}

// TestScatteringValidationOverGRPC: every bad field at once, as
// INVALID_ARGUMENT with BadRequest paths; and lengths the table cannot give.
func TestScatteringValidationOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	_, err := ts.api.ComputeScattering(testContext(t), &modegridv1.ComputeScatteringRequest{
		Model:      inline(example(t, "chain")),
		Scatterers: []*modegridv1.Scatterer{byLabel("Zz", 1)},
		Target:     &modegridv1.ComputeScatteringRequest_QList{QList: &modegridv1.QList{Points: []*modegridv1.QVector{{Q1: 0.2, Q2: 0.5}}}},
		Energy:     &modegridv1.EnergyAxis{Min: 5, Max: 1, Step: 0.1}, Resolution: &modegridv1.Resolution{Fwhm: []float64{-1}},
		TemperatureK: 300,
	})
	if status.Code(err) != codes.InvalidArgument {
		t.Fatalf("got %v, want INVALID_ARGUMENT", err)
	}
	f := badFields(t, err)
	for _, want := range []string{"scatterers[0].label", "scatterers", "debye_waller.off", "q_list.points[0].q2"} {
		if _, ok := f[want]; !ok {
			t.Errorf("no violation of %s in %v", want, f)
		}
	}
	// The invented labels P and Q: P is phosphorus by name, not by mass.
	_, err = ts.api.ComputeScattering(testContext(t), &modegridv1.ComputeScatteringRequest{
		Model:  inline(example(t, "rocksalt-like")),
		Target: &modegridv1.ComputeScatteringRequest_QList{QList: &modegridv1.QList{Points: []*modegridv1.QVector{{Q1: 0.2}}}},
	})
	f = badFields(t, err)
	if d := f["scatterers"]; !strings.Contains(d, "give") {
		t.Errorf("missing lengths: %v", f)
	}
	// Energy window checks, with a valid model.
	_, err = ts.api.ComputeScattering(testContext(t), &modegridv1.ComputeScatteringRequest{
		Model: inline(example(t, "fcc")), Scatterers: []*modegridv1.Scatterer{byLabel("M", 5)},
		Target: &modegridv1.ComputeScatteringRequest_QList{QList: &modegridv1.QList{Points: []*modegridv1.QVector{{Q1: 0.2}}}},
		Energy: &modegridv1.EnergyAxis{Min: 5, Max: 1, Step: 0.1},
	})
	if _, ok := badFields(t, err)["energy.max"]; !ok {
		t.Errorf("energy.max not refused: %v", err)
	}
}

// TestScatteringPrecompileRefusesBombs: a request whose lower bound from
// its message alone (scatterLowerBound) exceeds the memory budget is
// refused before its model is compiled: no computation counted.
func TestScatteringPrecompileRefusesBombs(t *testing.T) {
	ts := startServer(t, Config{MemoryBudget: 1868 << 20})
	m := []*modegridv1.Scatterer{byLabel("M", 5)}
	tests := []struct {
		name, field string
		req         *modegridv1.ComputeScatteringRequest
	}{
		{"512 sites, powder map with the default Debye–Waller grid", "powder", &modegridv1.ComputeScatteringRequest{Model: inline(cubicSupercell(8)), Scatterers: m,
			Target: &modegridv1.ComputeScatteringRequest_Powder{Powder: &modegridv1.PowderSpec{QMinInvA: 1, QMaxInvA: 2, QPoints: 2}}}},
		{"64 sites, weighted DOS on a 96³ grid", "weighted_dos.grid", &modegridv1.ComputeScatteringRequest{Model: inline(cubicSupercell(4)), Scatterers: m,
			Target: &modegridv1.ComputeScatteringRequest_WeightedDos{WeightedDos: &modegridv1.WeightedDosSpec{Grid: &modegridv1.MonkhorstPackGrid{Mesh: []uint32{96, 96, 96}}}}}},
		{"216 sites, a path with the default Debye–Waller grid", "path", &modegridv1.ComputeScatteringRequest{Model: inline(cubicSupercell(6)), Scatterers: m, TemperatureK: 300,
			Target: &modegridv1.ComputeScatteringRequest_Path{Path: &modegridv1.QPath{Corners: []*modegridv1.QPathCorner{{Q: &modegridv1.QVector{Q1: 1}}, {Q: &modegridv1.QVector{Q1: 2}}}}}}},
	}
	reg := ts.srv.Registry()
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			work0 := metricSum(t, reg, "modegrid_computations_total")
			_, err := ts.api.ComputeScattering(testContext(t), tt.req)
			if status.Code(err) != codes.InvalidArgument {
				t.Fatalf("got %v; want INVALID_ARGUMENT", err)
			}
			if d := badFields(t, err)[tt.field]; !strings.Contains(d, "estimated peak memory at least") {
				t.Errorf("%s: %q", tt.field, d)
			}
			if w := metricSum(t, reg, "modegrid_computations_total"); w != work0 {
				t.Errorf("computations (compile included) went from %v to %v: work started", work0, w)
			}
		})
	}
}

// TestScatteringBoundIsBelowTheEstimate: the pre-compile bound never
// exceeds the estimate made after the compile, memory or work, for every
// kind of target, on the examples and two supercells.
func TestScatteringBoundIsBelowTheEstimate(t *testing.T) {
	svc := NewService()
	crystals := []*modegridv1.Crystal{cubicSupercell(2), cubicSupercell(3), example(t, "fcc"), example(t, "rocksalt-like")}
	path := &modegridv1.ComputeScatteringRequest_Path{Path: &modegridv1.QPath{Points: 40, Corners: []*modegridv1.QPathCorner{
		{Q: &modegridv1.QVector{Q1: 1}}, {Q: &modegridv1.QVector{Q1: 1.5}}, {Q: &modegridv1.QVector{Q1: 1.5, Q2: 0.7}}}}}
	targets := map[string]func() *modegridv1.ComputeScatteringRequest{
		"path": func() *modegridv1.ComputeScatteringRequest {
			return &modegridv1.ComputeScatteringRequest{Target: path, TemperatureK: 300}
		},
		"list": func() *modegridv1.ComputeScatteringRequest {
			return &modegridv1.ComputeScatteringRequest{Target: &modegridv1.ComputeScatteringRequest_QList{QList: &modegridv1.QList{Points: []*modegridv1.QVector{{Q1: 0.3}, {Q2: 1.2}}}},
				DebyeWaller: &modegridv1.DebyeWaller{Off: true}, Energy: &modegridv1.EnergyAxis{Max: 30, Step: 0.1}}
		},
		"slice": func() *modegridv1.ComputeScatteringRequest {
			return &modegridv1.ComputeScatteringRequest{Target: &modegridv1.ComputeScatteringRequest_Slice{Slice: &modegridv1.QSlice{Origin: &modegridv1.QVector{}, UVector: &modegridv1.QVector{Q1: 1},
				VVector: &modegridv1.QVector{Q2: 1}, UMax: 1, VMax: 1, UPoints: 7, VPoints: 5}}, DebyeWaller: &modegridv1.DebyeWaller{Mesh: []uint32{6, 6, 6}}}
		},
		"powder": func() *modegridv1.ComputeScatteringRequest {
			return &modegridv1.ComputeScatteringRequest{Target: &modegridv1.ComputeScatteringRequest_Powder{Powder: &modegridv1.PowderSpec{QMinInvA: 1, QMaxInvA: 3, QPoints: 9}},
				Resolution: &modegridv1.Resolution{QFwhmInvA: 0.1}, DebyeWaller: &modegridv1.DebyeWaller{Mesh: []uint32{4, 4, 4}}, TemperatureK: 100}
		},
		"weighted dos": func() *modegridv1.ComputeScatteringRequest {
			return &modegridv1.ComputeScatteringRequest{Target: &modegridv1.ComputeScatteringRequest_WeightedDos{WeightedDos: &modegridv1.WeightedDosSpec{
				Grid: &modegridv1.MonkhorstPackGrid{Mesh: []uint32{8, 8, 8}}}}}
		},
	}
	for _, c := range crystals {
		src := inline(c)
		r, ok := svc.rawModelOf(src)
		if !ok {
			t.Fatalf("%s: not read", c.GetName())
		}
		e, sc := scatterEntry(t, src)
		for name, mk := range targets {
			req := mk()
			job := scatterJobOf(t, svc, e, src, sc, req, name)
			hi, err := svc.scatterEstimate(context.Background(), e, job, req)
			if err != nil {
				t.Fatal(err)
			}
			lo, ok := scatterLowerBound(r, req, svc.cfg.MaxQPoints)
			if !ok {
				t.Fatalf("%s %s: no bound", c.GetName(), name)
			}
			if lo.cost.Bytes > hi.cost.Bytes || lo.cost.Flops > hi.cost.Flops*(1+1e-12) || lo.field != hi.field {
				t.Errorf("%s %s: bound %+v (%s) above the estimate %+v (%s)", c.GetName(), name, lo.cost, lo.field, hi.cost, hi.field)
			}
		}
	}
}

// scatterEntry compiles the model of src and gives every label of it a
// scatterer (b = 4 fm, σ_inc = 1 barn; invented).
func scatterEntry(t *testing.T, src *modegridv1.ModelSource) (*modelEntry, []*modegridv1.Scatterer) {
	t.Helper()
	e, err := compileEntry(context.Background(), src, nil, physics.Limits{}, 0)
	if err != nil {
		t.Fatalf("%s: %v", src.GetCrystal().GetName(), err)
	}
	var sc []*modegridv1.Scatterer
	for _, l := range slices.Compact(slices.Sorted(slices.Values(e.m.Labels()))) {
		sc = append(sc, &modegridv1.Scatterer{Target: &modegridv1.Scatterer_Label{Label: l}, CoherentFm: proto.Float64(4), IncoherentBarn: proto.Float64(1)})
	}
	return e, sc
}

// scatterJobOf sets req's model and scatterers and converts it on e.
func scatterJobOf(t *testing.T, svc *Service, e *modelEntry, src *modegridv1.ModelSource, sc []*modegridv1.Scatterer, req *modegridv1.ComputeScatteringRequest, name string) *scatterJob {
	t.Helper()
	req.Model, req.Scatterers = src, sc
	var vs violations
	job := svc.scatterJob(e.m, req, &vs)
	if vs.Len() > 0 {
		t.Fatalf("%s %s: %v", src.GetCrystal().GetName(), name, vs.Err())
	}
	return job
}

// TestScatterReplyBytes: the reply size checked against the message cap
// before the work (scatterReplyBytes) is never below the response's
// encoded size and within 1.25× of it and 2 kB, for every kind of target
// (a path with its mode lines, a Q list, a slice, a powder map, a
// weighted DOS) on three crystals.
func TestScatterReplyBytes(t *testing.T) {
	svc := NewService()
	crystals := []*modegridv1.Crystal{cubicSupercell(2), example(t, "fcc"), example(t, "rocksalt-like")}
	axis := &modegridv1.EnergyAxis{Max: 40, Step: 0.05}
	targets := map[string]*modegridv1.ComputeScatteringRequest{
		"path with lines": {Lines: true, Energy: axis, DebyeWaller: &modegridv1.DebyeWaller{Off: true},
			Target: &modegridv1.ComputeScatteringRequest_Path{Path: &modegridv1.QPath{Points: 30, Corners: []*modegridv1.QPathCorner{
				{Q: &modegridv1.QVector{Q1: 1}, Label: "G"}, {Q: &modegridv1.QVector{Q1: 1.5}, Label: "X"}, {Q: &modegridv1.QVector{Q1: 1.5, Q2: 0.7}, Label: "W"}}}}},
		"list": {Target: &modegridv1.ComputeScatteringRequest_QList{QList: &modegridv1.QList{Points: []*modegridv1.QVector{{Q1: 0.3}, {Q2: 1.2}, {Q3: 0.7}}}},
			DebyeWaller: &modegridv1.DebyeWaller{Off: true}, Energy: axis, Resolution: &modegridv1.Resolution{Fwhm: []float64{0.5, 0.01}}},
		"slice": {Target: &modegridv1.ComputeScatteringRequest_Slice{Slice: &modegridv1.QSlice{Origin: &modegridv1.QVector{}, UVector: &modegridv1.QVector{Q1: 1},
			VVector: &modegridv1.QVector{Q2: 1}, UMax: 1, VMax: 1, UPoints: 5, VPoints: 4}}, DebyeWaller: &modegridv1.DebyeWaller{Mesh: []uint32{4, 4, 4}}, TemperatureK: 300},
		"powder": {Target: &modegridv1.ComputeScatteringRequest_Powder{Powder: &modegridv1.PowderSpec{QMinInvA: 1, QMaxInvA: 3, QPoints: 6, MaxDirections: 128}},
			DebyeWaller: &modegridv1.DebyeWaller{Mesh: []uint32{4, 4, 4}}, Energy: axis},
		"weighted dos": {Target: &modegridv1.ComputeScatteringRequest_WeightedDos{WeightedDos: &modegridv1.WeightedDosSpec{
			Grid: &modegridv1.MonkhorstPackGrid{Mesh: []uint32{6, 6, 6}}}}, Energy: axis},
	}
	for _, c := range crystals {
		src := inline(c)
		e, sc := scatterEntry(t, src)
		for name, tmpl := range targets {
			req := proto.Clone(tmpl).(*modegridv1.ComputeScatteringRequest)
			job := scatterJobOf(t, svc, e, src, sc, req, name)
			canon := scatterParams(req)
			est := scatterReplyBytes(e.m, job, canon)
			resp, err := runScatter(testContext(t), e, job)
			if err != nil {
				t.Fatalf("%s %s: %v", c.GetName(), name, err)
			}
			resp.ModelHash, resp.Parameters = e.hash, canon
			got := float64(proto.Size(resp))
			t.Logf("%s %s: %.0f / %.0f = %.3f", c.GetName(), name, est, got, est/got)
			if est < got || est > 1.25*got+2048 {
				t.Errorf("%s %s: estimated %.0f bytes, the response is %.0f", c.GetName(), name, est, got)
			}
		}
	}
}

// TestScatteringReplyCapOverGRPC: a path whose energies make a response
// past the message cap is refused before any work, on the target, naming
// the energies (a fuzzed request of 96 387 energies was answered
// RESOURCE_EXHAUSTED after its computation before).
func TestScatteringReplyCapOverGRPC(t *testing.T) {
	ts := startServer(t, Config{MaxMsgBytes: 1 << 20})
	reg := ts.srv.Registry()
	work0 := metricSum(t, reg, "modegrid_computations_total")
	_, err := ts.api.ComputeScattering(testContext(t), &modegridv1.ComputeScatteringRequest{
		Model: inline(example(t, "fcc")), Scatterers: []*modegridv1.Scatterer{byLabel("M", 5)}, DebyeWaller: &modegridv1.DebyeWaller{Off: true},
		Target: &modegridv1.ComputeScatteringRequest_Path{Path: &modegridv1.QPath{Points: 20, Corners: []*modegridv1.QPathCorner{{Q: &modegridv1.QVector{}}, {Q: &modegridv1.QVector{Q1: 1}}}}},
		Energy: &modegridv1.EnergyAxis{Max: 40, Step: 0.005},
	})
	if status.Code(err) != codes.InvalidArgument {
		t.Fatalf("got %v; want INVALID_ARGUMENT", err)
	}
	if d := badFields(t, err)["path"]; !strings.Contains(d, "× 8001 energies (energy)") || !strings.Contains(d, "max-msg-bytes=1048576") {
		t.Errorf("path: %q", d)
	}
	// The compile counts as a computation; the scattering itself must not.
	if w := metricSum(t, reg, "modegrid_computations_total"); w > work0+1 {
		t.Errorf("computations went from %v to %v: the scattering ran", work0, w)
	}
}
