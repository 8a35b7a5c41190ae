package thermo

import (
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// TestGridModesOtherModel: grid modes record the model that made them;
// ComputeDOS and ComputeThermal refuse those of another model of the same
// size, and accept those of a model with the same hash.
func TestGridModesOtherModel(t *testing.T) {
	a := testmodels.Load(t, "chain")
	b := testmodels.Clone(a)
	b.Springs[0].KLong *= 1.3 // same size, other physics
	ma, mb, ma2 := testmodels.Compile(t, a), testmodels.Compile(t, b), testmodels.Compile(t, testmodels.Clone(a))
	g := testmodels.Modes(t, ma, mesh.GridSpec{Mesh: [3]int{16}}, physics.GridOptions{})
	if g.ModelHash != ma.Hash() {
		t.Fatalf("ModelHash %q; want %q", g.ModelHash, ma.Hash())
	}
	ctx := testmodels.Ctx(t)
	if _, err := spectra.ComputeDOS(ctx, mb, g, spectra.DOSOptions{}); err == nil || !strings.Contains(err.Error(), "made by model") {
		t.Errorf("ComputeDOS with another model's modes: %v; want a refusal", err)
	}
	if _, err := ComputeThermal(ctx, mb, g, ThermalOptions{TempsK: []float64{300}}); err == nil || !strings.Contains(err.Error(), "made by model") {
		t.Errorf("ComputeThermal with another model's modes: %v; want a refusal", err)
	}
	mustDOS(t, ma2, g, spectra.DOSOptions{})
	mustThermal(t, ma2, g, ThermalOptions{TempsK: []float64{300}})
	forged := *g
	forged.ModelHash = ""
	if _, err := spectra.ComputeDOS(ctx, ma, &forged, spectra.DOSOptions{}); err == nil {
		t.Error("ComputeDOS accepted grid modes with no model recorded")
	}
}
