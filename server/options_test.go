package server

import (
	"errors"
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/spectra"
	"github.com/materials-lab/modegrid/physics/thermo"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// engineFields is the violations of an engine check by field path.
func engineFields(t *testing.T, err error) map[string]string {
	t.Helper()
	var ve *physics.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("engine check: %v (%T); want a *physics.ValidationError", err, err)
	}
	out := map[string]string{}
	for _, v := range ve.Violations {
		out[v.Field] = v.Description
	}
	return out
}

// agree checks that every engine violation reaches the client under the
// request path want maps it to, with the engine's description, and that
// the client sees no other violation.
func agree(t *testing.T, engine, client map[string]string, fm fieldMap) {
	t.Helper()
	if len(engine) != len(client) {
		t.Errorf("engine %v, client %v: different violations", engine, client)
	}
	for f, d := range engine {
		head, rest := splitField(f)
		if to, ok := fm[head]; ok {
			head = to
		}
		if got, ok := client[physics.JoinField(head, rest)]; !ok || got != d {
			t.Errorf("engine %s: %q; client %v", f, d, client)
		}
	}
}

// TestDOSOptionViolationsAgree: every bad DOS option is INVALID_ARGUMENT
// naming the request field, with the words of spectra.DOSOptions.Validate
// run on the same options — including a width with a method other than
// Gaussian, which the engine refuses and the server once dropped.
func TestDOSOptionViolationsAgree(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	fcc := inline(example(t, "fcc"))
	G, H := modegridv1.DosMethod_DOS_METHOD_GAUSSIAN, modegridv1.DosMethod_DOS_METHOD_HISTOGRAM
	for _, tt := range []struct {
		name string
		req  *modegridv1.ComputeDosRequest
	}{
		{"min NaN", &modegridv1.ComputeDosRequest{Min: math.NaN(), Max: 1}},
		{"max infinite", &modegridv1.ComputeDosRequest{Max: math.Inf(1)}},
		{"max below min", &modegridv1.ComputeDosRequest{Min: 5, Max: 1}},
		{"step negative", &modegridv1.ComputeDosRequest{Step: -0.1}},
		{"step huge", &modegridv1.ComputeDosRequest{Step: 2 * spectra.MaxDOSFrequency}},
		{"width negative", &modegridv1.ComputeDosRequest{Method: G, Width: -1}},
		{"width too narrow", &modegridv1.ComputeDosRequest{Method: G, Width: spectra.MinDOSWidth / 10}},
		{"width with tetrahedron", &modegridv1.ComputeDosRequest{Width: 0.5}},
		{"width with histogram", &modegridv1.ComputeDosRequest{Method: H, Width: 0.5}},
		{"several at once", &modegridv1.ComputeDosRequest{Method: H, Min: 2, Max: 1, Step: -1, Width: 0.5}},
	} {
		t.Run(tt.name, func(t *testing.T) {
			var vs violations
			opt, _ := dosOptions(tt.req, &vs)
			if vs.Len() != 0 {
				t.Fatalf("conversion: %v", vs.Err())
			}
			want := engineFields(t, opt.Validate())
			tt.req.Model, tt.req.Qpoints = fcc, mpGrid(false, 2, 2, 2)
			_, err := ts.api.ComputeDos(ctx, tt.req)
			agree(t, want, badFields(t, err), dosFields)
		})
	}
}

// TestThermalOptionViolationsAgree: every bad explicit temperature is
// INVALID_ARGUMENT naming temperatures_k[i] at its index in the request,
// with the words of thermo.ThermalOptions.Validate on the same options.
func TestThermalOptionViolationsAgree(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	fcc := inline(example(t, "fcc"))
	for _, tt := range []struct {
		name  string
		temps []float64
	}{
		{"negative", []float64{-1}},
		{"NaN after a good one", []float64{300, math.NaN()}},
		{"too hot and infinite", []float64{10 * thermo.MaxTempK, 100, math.Inf(-1)}},
	} {
		t.Run(tt.name, func(t *testing.T) {
			want := engineFields(t, thermo.ThermalOptions{TempsK: tt.temps}.Validate())
			_, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: fcc, Qpoints: mpGrid(false, 2, 2, 2),
				TemperaturesK: tt.temps, Range: &modegridv1.TemperatureRange{StartK: 10, StopK: 20, StepK: 5}})
			agree(t, want, badFields(t, err), thermalFields)
		})
	}
}
