package server

import (
	"math"
	"strings"
	"testing"

	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// tinyForceModel is a three-site crystal on the fcc lattice, heavy (1e6
// amu), with a denormal fractional coordinate and shells whose force
// constants are 1.4e-76 and 5.9e-303 eV/Å². Its stability scan once
// panicked inside gonum (lapack: insufficient length of a) and CheckModel
// answered INTERNAL.
func tinyForceModel() *modegridv1.Crystal {
	return &modegridv1.Crystal{
		Lattice: []*modegridv1.Vec3{{Y: 2, Z: 2}, {X: 2, Z: 2}, {X: 2, Y: 2}},
		Sites: []*modegridv1.Site{
			{Label: "C", MassAmu: 1e6, Frac: []float64{0, 2.37e-322, 0}},
			{Label: "B", MassAmu: 1e6, Frac: []float64{0, 0.5, 0}},
			{Label: "A", MassAmu: 1e6, Frac: []float64{0, 0, 0.5}},
		},
		Shells: []*modegridv1.Shell{
			{FromLabel: "A", ToLabel: "C", Shell: 2, KTrans: 5.9e-303},
			{FromLabel: "B", ToLabel: "B", Shell: 2, KTrans: 1.4e-76},
			{FromLabel: "B", ToLabel: "C", Shell: 1, KTrans: 5.9e-303},
		},
	}
}

// TestTinyForceConstantsRefused: force constants that are not 0 but below
// physics.MinForceEVPerA2 are refused with their field paths, by CheckModel
// in its report and by a computation as INVALID_ARGUMENT, over gRPC; the
// same model with those constants at 0 is valid and its scan finite.
func TestTinyForceConstantsRefused(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	r, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: inline(tinyForceModel())})
	if err != nil {
		t.Fatalf("CheckModel: %v (code %v); want an invalid model report", err, status.Code(err))
	}
	got := map[string]string{}
	for _, v := range r.GetViolations() {
		got[v.GetField()] = v.GetDescription()
	}
	for _, f := range []string{"shells[0].k_trans", "shells[2].k_trans"} {
		if !strings.Contains(got[f], "at least 1e-100 eV/Å²") || !strings.Contains(got[f], "5.9e-303") {
			t.Errorf("violation of %s: %q; want the 1e-100 eV/Å² floor and the value (all: %v)", f, got[f], got)
		}
	}
	if r.GetValid() || len(got) != 2 {
		t.Errorf("valid=%v, violations %v; want invalid with exactly the two tiny constants", r.GetValid(), got)
	}

	_, err = collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: inline(tinyForceModel()), Qpoints: qlist(0.1, 0.2, 0.3)})
	fields := badFields(t, err)
	if _, ok := fields["model.crystal.shells[0].k_trans"]; !ok || len(fields) != 2 {
		t.Errorf("ComputeModes violations %v; want model.crystal.shells[0].k_trans and [2]", fields)
	}

	c := tinyForceModel()
	c.Shells[0].KTrans, c.Shells[2].KTrans = 0, 0
	r, err = ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: inline(c)})
	if err != nil || !r.GetValid() {
		t.Fatalf("with the tiny constants at 0: %v, %v; want a valid model", r, err)
	}
	if lo, hi := r.GetMinFrequencyThz(), r.GetMaxFrequencyThz(); math.IsNaN(lo) || math.IsInf(lo, 0) || math.IsNaN(hi) || math.IsInf(hi, 0) {
		t.Errorf("with the tiny constants at 0: frequencies %v…%v THz; want finite", lo, hi)
	}
}
