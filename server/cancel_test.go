package server

import (
	"context"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// rocksaltSupercell returns the rock-salt-like example as an n×n×n
// supercell of its conventional cube: 8n³ sites (P on the fcc points of
// each cube, Q on the octahedral ones), the example's shells by label.
func rocksaltSupercell(t testing.TB, n int) *modegridv1.Crystal {
	t.Helper()
	ex := example(t, "rocksalt-like")
	const a = 5.6 // Å, the cube edge of the example (primitive vectors (0, a/2, a/2)…)
	L := a * float64(n)
	c := &modegridv1.Crystal{
		Lattice:       []*modegridv1.Vec3{{X: L}, {Y: L}, {Z: L}},
		Polarizations: ex.GetPolarizations(),
		ForceUnit:     ex.GetForceUnit(),
		Shells:        ex.GetShells(),
	}
	mass := map[string]float64{}
	for _, s := range ex.GetSites() {
		mass[s.GetLabel()] = s.GetMassAmu()
	}
	basis := []struct {
		label string
		f     [3]float64
	}{
		{"P", [3]float64{0, 0, 0}}, {"P", [3]float64{0, 0.5, 0.5}}, {"P", [3]float64{0.5, 0, 0.5}}, {"P", [3]float64{0.5, 0.5, 0}},
		{"Q", [3]float64{0.5, 0.5, 0.5}}, {"Q", [3]float64{0.5, 0, 0}}, {"Q", [3]float64{0, 0.5, 0}}, {"Q", [3]float64{0, 0, 0.5}},
	}
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			for k := 0; k < n; k++ {
				for _, b := range basis {
					c.Sites = append(c.Sites, &modegridv1.Site{Label: b.label, MassAmu: mass[b.label], Frac: []float64{
						(float64(i) + b.f[0]) / float64(n), (float64(j) + b.f[1]) / float64(n), (float64(k) + b.f[2]) / float64(n)}})
				}
			}
		}
	}
	return c
}

// TestDeadlineReleasesSlot: a 512-site CheckModel — compile, symmetry
// search and stability grid, minutes of work before the engine's stages
// were cancellable — sent with a short deadline ends DEADLINE_EXCEEDED;
// the computation is counted as cancelled and its slot is released, so
// with a single slot the next call is served.
func TestDeadlineReleasesSlot(t *testing.T) {
	started := make(chan string, 16)
	ts := startServer(t, Config{MaxConcurrent: 1}, serverOpts{hook: func(_ context.Context, kind string) {
		select {
		case started <- kind:
		default:
		}
	}})
	big := rocksaltSupercell(t, 4)
	if n := len(big.GetSites()); n != 512 {
		t.Fatalf("supercell has %d sites; want 512", n)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 500*time.Millisecond)
	defer cancel()
	_, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: inline(big)})
	if status.Code(err) != codes.DeadlineExceeded {
		t.Fatalf("CheckModel of 512 sites with a 500 ms deadline: %v; want DEADLINE_EXCEEDED", err)
	}
	select {
	case k := <-started:
		if k != kindCompile {
			t.Errorf("first computation was %q; want %q", k, kindCompile)
		}
	default:
		t.Fatal("the 512-site model was never compiled: the deadline tested nothing")
	}
	reg := ts.srv.Registry()
	waitFor(t, "the cancelled computation to be counted", func() bool {
		return metricSum(t, reg, "modegrid_computations_canceled_total") == 1
	})
	waitFor(t, "the slot to be released", func() bool { return ts.srv.svc.gate.InFlight() == 0 })
	resp, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: inline(example(t, "fcc"))})
	if err != nil {
		t.Fatalf("the next call after the cancelled one: %v", err)
	}
	if !resp.GetValid() || len(resp.GetSymmetry()) != 48 {
		t.Errorf("next call: valid %v with %d symmetry operations; want a valid fcc model with 48", resp.GetValid(), len(resp.GetSymmetry()))
	}
}
