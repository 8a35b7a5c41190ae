package server

import (
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// TestQOutOfRange: a q component that is not finite or beyond ±1e6
// reciprocal-lattice units (physics.MaxQ) is INVALID_ARGUMENT naming the
// field, over real gRPC, for explicit lists and path corners; q = 1e6
// itself, an image of Γ, is accepted and gives the exact acoustic zero.
func TestQOutOfRange(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	chain, fcc := inline(example(t, "chain")), inline(example(t, "fcc"))
	_, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: chain, Qpoints: qlist(0.1, -1e308, 1e6+1)})
	fields := badFields(t, err)
	for _, f := range []string{"qpoints.list.points[1].q1", "qpoints.list.points[2].q1"} {
		if _, ok := fields[f]; !ok {
			t.Errorf("violations %v do not name %s", fields, f)
		}
	}
	chunks, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: chain, Qpoints: qlist(1e6, -1e6+0.5)})
	if err != nil {
		t.Fatal(err)
	}
	pts := allPoints(chunks)
	if f := pts[0].GetFrequencies(); len(f) != 1 || f[0] != 0 {
		t.Errorf("q = 1e6 (an image of Γ): %v; want exactly [0]", f)
	}
	// ω = 2 sqrt(K/M) |sin(πq)| (Kittel ch. 4): the zone boundary at q ≡ ½.
	c := example(t, "chain")
	K, M := c.GetSprings()[0].GetKLong(), c.GetSites()[0].GetMassAmu()
	if f, want := pts[1].GetFrequencies()[0], 2*math.Sqrt(K/M)*physics.NuUnitTHz; math.Abs(f-want) > 1e-6*want {
		t.Errorf("q = −1e6 + ½: %v THz; want %v (the zone boundary)", f, want)
	}
	_, err = ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: fcc,
		Path: []*modegridv1.PathPoint{{Label: "G"}, {Q: &modegridv1.QPoint{Q1: 1e308}}}})
	if _, ok := badFields(t, err)["path[1].q.q1"]; !ok {
		t.Errorf("dispersion: %v does not name path[1].q.q1", err)
	}
}

// TestDosParameterBounds: DOS window and width are bounded where they
// enter (spectra.MaxDOSFrequency, MinDOSWidth), so no request can
// overflow the window arithmetic into NaN samples.
func TestDosParameterBounds(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	chain := inline(example(t, "chain"))
	for _, tc := range []struct {
		name  string
		req   *modegridv1.ComputeDosRequest
		field string
	}{
		{"huge width", &modegridv1.ComputeDosRequest{Model: chain, Qpoints: mpGrid(false, 8), Method: modegridv1.DosMethod_DOS_METHOD_GAUSSIAN, Width: 1e308}, "width"},
		{"tiny width", &modegridv1.ComputeDosRequest{Model: chain, Qpoints: mpGrid(false, 8), Method: modegridv1.DosMethod_DOS_METHOD_GAUSSIAN, Width: 5e-324}, "width"},
		{"huge window", &modegridv1.ComputeDosRequest{Model: chain, Qpoints: mpGrid(false, 8), Min: -1e308, Max: 1e308}, "min"},
	} {
		_, err := ts.api.ComputeDos(ctx, tc.req)
		if _, ok := badFields(t, err)[tc.field]; !ok {
			t.Errorf("%s: %v does not name %s", tc.name, err, tc.field)
		}
	}
}
