package server

import (
	"context"
	"fmt"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// cubicSupercell is a k×k×k supercell of a simple cubic crystal (edge
// 2 Å) with nearest-neighbour springs: k³ sites. Every site gets its own
// mass so that no symmetry but time reversal relates them (compiling
// stays quick, and the estimates use the plain bound of irreducible
// points).
func cubicSupercell(k int) *modegridv1.Crystal {
	a := 2.0 * float64(k)
	c := &modegridv1.Crystal{
		Name:          fmt.Sprintf("cubic-%d", k*k*k),
		Lattice:       []*modegridv1.Vec3{{X: a}, {Y: a}, {Z: a}},
		Polarizations: 3,
		ForceUnit:     modegridv1.ForceUnit_FORCE_UNIT_EV_PER_A2,
		Shells:        []*modegridv1.Shell{{FromLabel: "M", ToLabel: "M", Shell: 1, KLong: 1.2, KTrans: 0.3}},
	}
	for i := range k * k * k {
		c.Sites = append(c.Sites, &modegridv1.Site{Label: "M", MassAmu: 50 + 0.01*float64(i),
			Frac: []float64{float64(i/(k*k)) / float64(k), float64(i/k%k) / float64(k), float64(i%k) / float64(k)}})
	}
	return c
}

// TestAdmissionRefusesBombs: requests within every cap whose estimated
// memory, work or reply could never fit are refused INVALID_ARGUMENT
// before any work (no computation beyond compiling the model, no q-point
// diagonalised), naming the field to change, the estimate and the budget
// or bound.
func TestAdmissionRefusesBombs(t *testing.T) {
	ts := startServer(t, Config{MemoryBudget: 2700 << 20})
	small := startServer(t, Config{MaxMsgBytes: 512 << 10, MaxChunkBytes: 128 << 10})
	c216, c64, c8 := cubicSupercell(6), cubicSupercell(4), cubicSupercell(2)
	tests := []struct {
		name  string
		call  func(ctx context.Context) error
		field string
		words []string
	}{
		{"216 sites 160³ per-site DOS", func(ctx context.Context) error {
			_, err := ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: inline(c216), Qpoints: mpGrid(false, 160, 160, 160), PerSite: true})
			return err
		}, "qpoints", []string{"estimated peak memory", "memory budget 2.64 GiB", "smaller grid"}},
		{"64 sites 24³ mean-square displacements", func(ctx context.Context) error {
			_, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: inline(c64), Qpoints: mpGrid(false, 24, 24, 24), TemperaturesK: []float64{300}, Msd: true})
			return err
		}, "qpoints", []string{"estimated peak memory", "memory budget 2.64 GiB", "msd"}},
		{"8 sites 64³ mean-square displacements", func(ctx context.Context) error {
			_, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: inline(c8), Qpoints: mpGrid(false, 64, 64, 64), TemperaturesK: []float64{300}, Msd: true})
			return err
		}, "qpoints", []string{"estimated peak memory", "memory budget"}},
		{"one point of eigenvectors over the message cap", func(ctx context.Context) error {
			_, err := collectModes(ctx, small.api, &modegridv1.ComputeModesRequest{Model: inline(c64), Qpoints: qlist(0, 0, 0), Eigenvectors: true})
			return err
		}, "eigenvectors", []string{"max-msg-bytes=524288"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			reg := ts.srv.Registry()
			work0 := metricSum(t, reg, "modegrid_computations_total", kindCompile)
			q0 := metric(t, reg, "modegrid_qpoints_diagonalized_total", nil)
			err := tt.call(testContext(t))
			if status.Code(err) != codes.InvalidArgument {
				t.Fatalf("got %v; want INVALID_ARGUMENT", err)
			}
			fields := badFields(t, err)
			desc, ok := fields[tt.field]
			if !ok {
				t.Fatalf("violations %v do not name %s", fields, tt.field)
			}
			for _, w := range tt.words {
				if !strings.Contains(desc, w) {
					t.Errorf("%s: %q does not say %q", tt.field, desc, w)
				}
			}
			t.Logf("%s: %s", tt.field, desc)
			if w := metricSum(t, reg, "modegrid_computations_total", kindCompile); w != work0 {
				t.Errorf("computations went from %v to %v: work started", work0, w)
			}
			if q := metric(t, reg, "modegrid_qpoints_diagonalized_total", nil); q != q0 {
				t.Errorf("q-points diagonalised went from %v to %v", q0, q)
			}
		})
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_admission_refused_total", map[string]string{"reason": reasonMemoryNeverFits}); n != 3 {
		t.Errorf("memory_never_fits refusals = %v; want 3", n)
	}
}

// TestAdmissionWorkBound: a CheckModel whose estimated work cannot finish
// within max-compute-seconds is refused before it starts, naming the
// estimate and the bound.
func TestAdmissionWorkBound(t *testing.T) {
	ts := startServer(t, Config{MaxComputeSeconds: 1e-4})
	_, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: inline(cubicSupercell(2))})
	fields := badFields(t, err)
	if d := fields["model"]; !strings.Contains(d, "estimated work") || !strings.Contains(d, "max-compute-seconds=0.0001") {
		t.Errorf("model: %q; want the estimated work and the bound named", d)
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_admission_refused_total", map[string]string{"reason": reasonWorkTooLong}); n != 1 {
		t.Errorf("work_too_long refusals = %v; want 1", n)
	}
}

// TestAdmissionSharesOneBudget: two requests that each fit the memory
// budget but not together: while the first computes (held by a hook) the
// second waits for memory and, past the queue timeout, is refused
// RESOURCE_EXHAUSTED naming the estimate and the budget; the memory in use
// never exceeds the budget; once the first is done the second is admitted.
func TestAdmissionSharesOneBudget(t *testing.T) {
	fcc := example(t, "fcc")
	probe := NewService()
	e, err := probe.resolve(context.Background(), inline(fcc), &violations{})
	if err != nil {
		t.Fatal(err)
	}
	spec := mesh.GridSpec{Mesh: [3]int{20, 20, 20}}
	one := probe.dosEstimate(e, spec, spectra.DOSOptions{PerSite: true}).cost.Bytes
	b := newBlocker(kindDOS)
	ts := startServer(t, Config{MemoryBudget: one * 3 / 2, QueueTimeout: 300 * time.Millisecond}, serverOpts{hook: b.hook})
	reg := ts.srv.Registry()
	req := func(unit modegridv1.FrequencyUnit) *modegridv1.ComputeDosRequest {
		return &modegridv1.ComputeDosRequest{Model: inline(fcc), Qpoints: mpGrid(false, 20, 20, 20), PerSite: true, Unit: unit}
	}
	first := make(chan error, 1)
	go func() {
		_, err := ts.api.ComputeDos(testContext(t), req(modegridv1.FrequencyUnit_FREQUENCY_UNIT_THZ))
		first <- err
	}()
	<-b.entered // the first holds its memory and computes
	inUse := metric(t, reg, "modegrid_memory_budget_in_use_bytes", nil)
	total := metric(t, reg, "modegrid_memory_budget_bytes", nil)
	if inUse <= 0 || inUse > total {
		t.Errorf("in use %v of %v while one request computes", inUse, total)
	}
	// Another unit: another cache entry, so it is not merged with the first.
	_, err = ts.api.ComputeDos(testContext(t), req(modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1))
	if status.Code(err) != codes.ResourceExhausted || !strings.Contains(err.Error(), "memory budget") || !strings.Contains(err.Error(), "estimated peak memory") {
		t.Errorf("second request: %v; want RESOURCE_EXHAUSTED naming the estimate and the memory budget", err)
	}
	if n := metric(t, reg, "modegrid_admission_refused_total", map[string]string{"reason": reasonMemoryBusy}); n != 1 {
		t.Errorf("memory_busy refusals = %v; want 1", n)
	}
	close(b.release)
	if err := <-first; err != nil {
		t.Fatalf("first request: %v", err)
	}
	if _, err := ts.api.ComputeDos(testContext(t), req(modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1)); err != nil {
		t.Errorf("second request once the first is done: %v", err)
	}
	if v := metric(t, reg, "modegrid_memory_budget_in_use_bytes", nil); v != 0 {
		t.Errorf("in use after both: %v; want 0", v)
	}
}

// TestCheckModelReportsTypicalCosts: CheckModel lists estimated costs of
// typical requests, larger for a larger model.
func TestCheckModelReportsTypicalCosts(t *testing.T) {
	ts := startServer(t, Config{})
	costs := map[int]*modegridv1.CheckModelResponse{}
	for _, k := range []int{1, 2} {
		r, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: inline(cubicSupercell(k))})
		if err != nil {
			t.Fatal(err)
		}
		if len(r.GetTypicalCosts()) == 0 {
			t.Fatalf("%d sites: no typical costs", k*k*k)
		}
		costs[k] = r
	}
	for i, c := range costs[1].GetTypicalCosts() {
		big := costs[2].GetTypicalCosts()[i]
		if c.GetRequest() != big.GetRequest() || !(big.GetPeakBytes() > c.GetPeakBytes()) || !(big.GetSeconds() > c.GetSeconds()) || c.GetPeakBytes() == 0 {
			t.Errorf("%s: 1 site %d B %g s, 8 sites %s %d B %g s; want more for more sites", c.GetRequest(), c.GetPeakBytes(), c.GetSeconds(), big.GetRequest(), big.GetPeakBytes(), big.GetSeconds())
		}
	}
}
