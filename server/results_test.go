package server

import (
	"context"
	"math"
	"strings"
	"sync"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// respelled is the fcc example written differently: another name, and
// its spring constant in N/m (1.2 eV/Å² × 16.02176634 N/m per eV/Å², CODATA
// 2018 exact). The model hash ignores both (physics.Model.Hash).
func respelled(t *testing.T) *modegridv1.Crystal {
	c := proto.Clone(example(t, "fcc")).(*modegridv1.Crystal)
	c.Name = "the same crystal, spelled otherwise"
	c.ForceUnit = modegridv1.ForceUnit_FORCE_UNIT_N_PER_M
	for _, sh := range c.GetShells() {
		sh.KLong *= 16.02176634
		sh.KTrans *= 16.02176634
	}
	return c
}

// TestDosSpelledDifferently: three requests equal in meaning — defaults
// left unset, defaults spelled out with the model in N/m under another
// name, and the model by hash — compute once and answer alike; the hits
// are read from the metrics registry.
func TestDosSpelledDifferently(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	first, err := ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{
		Model: inline(example(t, "fcc")), Qpoints: mpGrid(false, 8, 8, 8),
	})
	if err != nil {
		t.Fatal(err)
	}
	reqs := []*modegridv1.ComputeDosRequest{
		{Model: inline(respelled(t)), Qpoints: mpGrid(false, 8, 8, 8), Method: modegridv1.DosMethod_DOS_METHOD_TETRAHEDRON,
			Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_THZ, Imaginary: modegridv1.ImaginaryModes_IMAGINARY_MODES_EXCLUDE},
		{Model: byHash(first.GetModelHash()), Qpoints: mpGrid(false, 8, 8, 8)},
	}
	for i, req := range reqs {
		got, err := ts.api.ComputeDos(ctx, req)
		if err != nil {
			t.Fatalf("spelling %d: %v", i, err)
		}
		if !proto.Equal(got, first) {
			t.Errorf("spelling %d answered differently (parameters %q vs %q)", i, got.GetParameters(), first.GetParameters())
		}
	}
	reg := ts.srv.Registry()
	if n := metric(t, reg, "modegrid_computations_total", map[string]string{"kind": kindDOS}); n != 1 {
		t.Errorf("DOS computations %v; want 1", n)
	}
	if n := metric(t, reg, "modegrid_cache_hits_total", map[string]string{"kind": kindDOS, "level": "memory"}); n != 2 {
		t.Errorf("DOS memory hits %v; want 2", n)
	}
	if n := metric(t, reg, "modegrid_cache_misses_total", map[string]string{"kind": kindDOS}); n != 1 {
		t.Errorf("DOS misses %v; want 1", n)
	}
	p := first.GetParameters()
	for _, want := range []string{"grid=mp:8x8x8", "method=tetrahedron", "unit=thz", "window=auto", "imaginary=exclude"} {
		if !strings.Contains(p, want) {
			t.Errorf("parameters %q lack %s", p, want)
		}
	}
	if strings.Contains(p, "width") {
		t.Errorf("parameters %q mention a width the method does not use", p)
	}
	// Normalisation: the integrated DOS reaches p·sites = 3 states per
	// cell (definition of g; Ashcroft & Mermin ch. 23), to 1e-6.
	in := first.GetIntegrated()
	if got := in[len(in)-1]; math.Abs(got-3) > 1e-6 || first.GetStatesPerCell() != 3 {
		t.Errorf("integrated DOS ends at %v of %v states; want 3", got, first.GetStatesPerCell())
	}
}

// TestDosAndThermalShareGrid: a DOS and a thermal request on one model and
// grid diagonalise once; a need the cached grid cannot serve (per-site
// weights) computes a new one, which then serves frequency-only requests.
func TestDosAndThermalShareGrid(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	model := inline(example(t, "rocksalt-like"))
	grids := func() float64 {
		return metric(t, ts.srv.Registry(), "modegrid_computations_total", map[string]string{"kind": kindGrid})
	}
	if _, err := ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: model, Qpoints: mpGrid(false, 6, 6, 6)}); err != nil {
		t.Fatal(err)
	}
	if _, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: model, Qpoints: mpGrid(false, 6, 6, 6), TemperaturesK: []float64{300}}); err != nil {
		t.Fatal(err)
	}
	if n := grids(); n != 1 {
		t.Fatalf("grid computations after DOS and thermal: %v; want 1", n)
	}
	if _, err := ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: model, Qpoints: mpGrid(false, 6, 6, 6), PerSite: true,
		Method: modegridv1.DosMethod_DOS_METHOD_GAUSSIAN}); err != nil {
		t.Fatal(err)
	}
	if n := grids(); n != 2 {
		t.Fatalf("grid computations after a per-site DOS: %v; want 2", n)
	}
	if _, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: model, Qpoints: mpGrid(false, 6, 6, 6), TemperaturesK: []float64{500}}); err != nil {
		t.Fatal(err)
	}
	if n := grids(); n != 2 {
		t.Errorf("grid computations after another thermal request: %v; want still 2", n)
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_cache_hits_total", map[string]string{"kind": kindGrid, "level": "memory"}); n < 2 {
		t.Errorf("grid memory hits %v; want ≥ 2", n)
	}
}

// TestConcurrentIdenticalOnce: 20 concurrent identical requests compute
// once: the grid and the DOS one time each, the other 19 wait for it.
func TestConcurrentIdenticalOnce(t *testing.T) {
	b := newBlocker(kindGrid)
	ts := startServer(t, Config{}, serverOpts{hook: b.hook})
	ctx := testContext(t)
	req := &modegridv1.ComputeDosRequest{Model: inline(example(t, "fcc")), Qpoints: mpGrid(true, 6, 6, 6)}
	// Compile once so that the 20 requests meet at the DOS.
	if _, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: req.Model, Qpoints: qlist(0)}); err != nil {
		t.Fatal(err)
	}
	const n = 20
	resps := make([]*modegridv1.ComputeDosResponse, n)
	var wg sync.WaitGroup
	for i := range n {
		wg.Go(func() {
			r, err := ts.api.ComputeDos(ctx, req)
			if err != nil {
				t.Errorf("request %d: %v", i, err)
			}
			resps[i] = r
		})
	}
	<-b.entered
	waitFor(t, "20 waiting DOS requests", func() bool { return ts.srv.svc.cache.Waiting(kindDOS) == n })
	close(b.release)
	wg.Wait()
	reg := ts.srv.Registry()
	for _, kind := range []string{kindGrid, kindDOS} {
		if got := metric(t, reg, "modegrid_computations_total", map[string]string{"kind": kind}); got != 1 {
			t.Errorf("%s computations %v; want 1", kind, got)
		}
	}
	if got := metric(t, reg, "modegrid_cache_flight_joins_total", map[string]string{"kind": kindDOS}); got != n-1 {
		t.Errorf("DOS flight joins %v; want %d", got, n-1)
	}
	for i := 1; i < n; i++ {
		if !proto.Equal(resps[i], resps[0]) {
			t.Errorf("response %d differs from response 0", i)
		}
	}
}

// TestCancelSharedComputation: a computation shared by two requests goes on
// while one of them remains; when the last leaves it stops and is counted.
func TestCancelSharedComputation(t *testing.T) {
	b := newBlocker(kindGrid)
	ts := startServer(t, Config{}, serverOpts{hook: b.hook})
	req := &modegridv1.ComputeThermalRequest{Model: inline(example(t, "fcc")), Qpoints: mpGrid(false, 5, 5, 5), TemperaturesK: []float64{100}}
	errs := make(chan error, 2)
	cancels := make([]context.CancelFunc, 2)
	for i := range cancels {
		ctx, cancel := context.WithCancel(testContext(t))
		cancels[i] = cancel
		go func() {
			_, err := ts.api.ComputeThermal(ctx, req)
			errs <- err
		}()
	}
	<-b.entered
	waitFor(t, "two waiting requests", func() bool { return ts.srv.svc.cache.Waiting(kindThermal) == 2 })
	cancels[0]()
	if err := <-errs; status.Code(err) != codes.Canceled {
		t.Fatalf("first request: %v; want Canceled", err)
	}
	waitFor(t, "one waiting request", func() bool { return ts.srv.svc.cache.Waiting(kindThermal) == 1 })
	if n := metric(t, ts.srv.Registry(), "modegrid_computations_canceled_total", map[string]string{"kind": kindGrid}); n != 0 {
		t.Fatalf("grid cancelled (%v) while a request still waited", n)
	}
	cancels[1]()
	if err := <-errs; status.Code(err) != codes.Canceled {
		t.Fatalf("second request: %v; want Canceled", err)
	}
	waitFor(t, "the grid computation to be cancelled", func() bool {
		return metric(t, ts.srv.Registry(), "modegrid_computations_canceled_total", map[string]string{"kind": kindGrid}) == 1
	})
}

func TestThermal(t *testing.T) {
	ts := startServer(t, Config{MaxTemps: 50})
	ctx := testContext(t)
	fcc := inline(example(t, "fcc"))
	t.Run("list and range spell the same request", func(t *testing.T) {
		a, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: fcc, Qpoints: mpGrid(false, 6, 6, 6), TemperaturesK: []float64{0, 100, 200, 300}})
		if err != nil {
			t.Fatal(err)
		}
		b, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: fcc, Qpoints: mpGrid(false, 6, 6, 6),
			Range: &modegridv1.TemperatureRange{StartK: 0, StopK: 300, StepK: 100}, Route: modegridv1.ThermalRoute_THERMAL_ROUTE_MODE_SUM})
		if err != nil {
			t.Fatal(err)
		}
		if !proto.Equal(a, b) {
			t.Errorf("list and range answered differently: %q vs %q", a.GetParameters(), b.GetParameters())
		}
		if !strings.Contains(a.GetParameters(), "temperatures_k=0:100:300") {
			t.Errorf("parameters %q do not show the temperatures as a range", a.GetParameters())
		}
		if len(a.GetPoints()) != 4 {
			t.Errorf("%d points; want 4", len(a.GetPoints()))
		}
	})
	t.Run("high temperature reaches Dulong-Petit", func(t *testing.T) {
		r, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: fcc, Qpoints: mpGrid(false, 8, 8, 8), TemperaturesK: []float64{5000}})
		if err != nil {
			t.Fatal(err)
		}
		// 3R = 24.94338785 J/(mol·K) per mole of cells of one atom
		// (Dulong–Petit, R from CODATA 2018); at 5000 K the high-T series
		// correction ⟨x²⟩/12 is below 1e-3 for modes under 10 THz (x < 0.1).
		cv := r.GetPoints()[0].GetHeatCapacityJPerMolK()
		if math.Abs(cv-24.94338785) > 0.01*24.94338785 {
			t.Errorf("Cv(5000 K) = %v J/(mol·K); want 3R = 24.943 within 1%%", cv)
		}
		// Per cell and per mole agree: eV/K × e·N_A = J/(mol·K) (CODATA 2018).
		if got := r.GetPoints()[0].GetHeatCapacityEvPerK() * 1.602176634e-19 * 6.02214076e23; math.Abs(got-cv) > 1e-9*cv {
			t.Errorf("Cv per cell %v J/(mol·K) after conversion; per mole says %v", got, cv)
		}
	})
	t.Run("unstable model", func(t *testing.T) {
		req := &modegridv1.ComputeThermalRequest{Model: inline(unstableChain()), Qpoints: mpGrid(false, 16), TemperaturesK: []float64{300}}
		_, err := ts.api.ComputeThermal(ctx, req)
		if status.Code(err) != codes.FailedPrecondition {
			t.Fatalf("got %v; want FailedPrecondition", err)
		}
		req.AllowUnstable = true
		r, err := ts.api.ComputeThermal(ctx, req)
		if err != nil {
			t.Fatal(err)
		}
		if r.GetImaginaryModesExcluded() == 0 {
			t.Error("no imaginary modes excluded; want the unstable ones counted")
		}
	})
	t.Run("violations", func(t *testing.T) {
		_, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: fcc, Qpoints: qlist(0.1),
			TemperaturesK: []float64{-1, math.NaN()}, Range: &modegridv1.TemperatureRange{StartK: 10, StopK: 5, StepK: 0}, Route: 9})
		fields := badFields(t, err)
		for _, f := range []string{"qpoints.list", "temperatures_k[0]", "temperatures_k[1]", "range.step_k", "route"} {
			if _, ok := fields[f]; !ok {
				t.Errorf("violations %v do not name %s", fields, f)
			}
		}
		_, err = ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: fcc, Qpoints: mpGrid(false, 2, 2, 2),
			Range: &modegridv1.TemperatureRange{StartK: 0, StopK: 1000, StepK: 1}})
		if d := badFields(t, err)["range"]; !strings.Contains(d, "max-temps=50") {
			t.Errorf("range violation %q does not name the cap max-temps=50", d)
		}
	})
}

func TestDosViolations(t *testing.T) {
	ts := startServer(t, Config{MaxDOSBins: 1000})
	ctx := testContext(t)
	_, err := ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: inline(example(t, "fcc")), Qpoints: qlist(0),
		Method: 7, Imaginary: 5, Min: 0, Max: 10, Step: 0.001, Width: math.Inf(1)})
	fields := badFields(t, err)
	for _, f := range []string{"qpoints.list", "method", "imaginary", "step", "width"} {
		if _, ok := fields[f]; !ok {
			t.Errorf("violations %v do not name %s", fields, f)
		}
	}
	if d := fields["step"]; !strings.Contains(d, "max-dos-bins=1000") {
		t.Errorf("step violation %q does not name the cap", d)
	}
}

// TestResponseSizeCap: an answer over max-msg-bytes is refused before the
// work when its size is known (INVALID_ARGUMENT naming the cap), and after
// it otherwise (RESOURCE_EXHAUSTED, and not cached).
func TestResponseSizeCap(t *testing.T) {
	ts := startServer(t, Config{MaxMsgBytes: 64 << 10, MaxChunkBytes: 16 << 10})
	ctx := testContext(t)
	fcc := inline(example(t, "fcc"))
	// 10 001 samples × 3 series × 8 bytes = 240 kB > 64 KiB.
	_, err := ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: fcc, Qpoints: mpGrid(false, 4, 4, 4), Min: 0, Max: 10, Step: 0.001})
	if d := badFields(t, err)["step"]; !strings.Contains(d, "max-msg-bytes=65536") {
		t.Errorf("step violation %q does not name the cap", d)
	}
	for range 2 {
		_, err = ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: fcc, Qpoints: mpGrid(false, 4, 4, 4), Step: 0.001})
		if status.Code(err) != codes.ResourceExhausted || !strings.Contains(status.Convert(err).Message(), "max-msg-bytes") {
			t.Errorf("auto window, fine step: %v; want ResourceExhausted naming max-msg-bytes", err)
		}
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_computations_total", map[string]string{"kind": kindDOS}); n != 2 {
		t.Errorf("DOS computations %v; want 2 (the refused answer is not cached)", n)
	}
}
