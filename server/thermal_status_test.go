package server

import (
	"testing"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// TestThermalStatusOverGRPC: over real gRPC, θ_D(T) carries its status —
// the elastic θ_D as the T = 0 limit, GRID_TOO_COARSE with a reason and no
// number on the fcc example's 8³ grid at 0.5 K (its lowest mode is ~115
// k_BT/h) — and a chain's displacements are flagged divergent with no
// numbers (one-dimensional crystal: Peierls, Helv. Phys. Acta 7, 81
// (1934)), while the fcc example's stay finite.
func TestThermalStatusOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	fcc, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: inline(example(t, "fcc")),
		Qpoints: mpGrid(false, 8, 8, 8), TemperaturesK: []float64{0, 0.5, 50}, Msd: true})
	if err != nil {
		t.Fatal(err)
	}
	p := fcc.GetPoints()
	if p[0].GetDebyeTemperatureStatus() != modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_ELASTIC_LIMIT ||
		p[0].GetDebyeTemperatureK() != fcc.GetDebyeTemperatureElasticK() {
		t.Errorf("0 K: θ_D %g (%v); want the elastic limit %g", p[0].GetDebyeTemperatureK(), p[0].GetDebyeTemperatureStatus(), fcc.GetDebyeTemperatureElasticK())
	}
	if p[1].GetDebyeTemperatureStatus() != modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_GRID_TOO_COARSE ||
		p[1].GetDebyeTemperatureK() != 0 || p[1].GetDebyeTemperatureReason() == "" {
		t.Errorf("0.5 K: θ_D %g (%v, %q); want 0, GRID_TOO_COARSE and a reason", p[1].GetDebyeTemperatureK(), p[1].GetDebyeTemperatureStatus(), p[1].GetDebyeTemperatureReason())
	}
	if p[2].GetDebyeTemperatureStatus() != modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_DETERMINED || !(p[2].GetDebyeTemperatureK() > 0) {
		t.Errorf("50 K: θ_D %g (%v); want determined", p[2].GetDebyeTemperatureK(), p[2].GetDebyeTemperatureStatus())
	}
	if d := p[2].GetDisplacements()[0]; d.GetDivergent() || !(d.GetUIsoA2() > 0) {
		t.Errorf("fcc displacement %v; want finite", d)
	}
	chain, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: inline(example(t, "chain")),
		Qpoints: mpGrid(false, 64), TemperaturesK: []float64{0, 300}, Msd: true})
	if err != nil {
		t.Fatal(err)
	}
	for _, pt := range chain.GetPoints() {
		d := pt.GetDisplacements()[0]
		if !d.GetDivergent() || d.GetDivergenceReason() == "" || d.GetUIsoA2() != 0 || len(d.GetUA2()) != 0 {
			t.Errorf("chain at %g K: %v; want divergent, with a reason and no numbers", pt.GetTemperatureK(), d)
		}
	}
}
