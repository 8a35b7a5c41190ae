package server

import (
	"context"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
	"github.com/materials-lab/modegrid/physics/thermo"
	"github.com/materials-lab/modegrid/proto/examples"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// TestPrecompileRefusesNewModelBombs: the memory and reply bombs of the
// adversarial suite, each carrying a model the server has never seen, are
// refused INVALID_ARGUMENT from the request alone: no computation of any
// kind is counted — not even the model's compile — and no q-point is
// diagonalised. That is the proof that the refusal comes before any work.
func TestPrecompileRefusesNewModelBombs(t *testing.T) {
	ts := startServer(t, Config{MemoryBudget: 1868 << 20})
	tests := []struct {
		name, field string
		words       []string
		call        func(ctx context.Context) error
	}{
		{"216 sites, 160³ grid, per-site DOS", "qpoints", []string{"estimated peak memory at least", "memory budget 1.82 GiB", "per_site"}, func(ctx context.Context) error {
			_, err := ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: inline(cubicSupercell(6)), Qpoints: mpGrid(false, 160, 160, 160), PerSite: true})
			return err
		}},
		{"64 sites, 160³ grid, per-site DOS", "qpoints", []string{"estimated peak memory at least"}, func(ctx context.Context) error {
			_, err := ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: inline(cubicSupercell(4)), Qpoints: mpGrid(false, 160, 160, 160), PerSite: true})
			return err
		}},
		{"64 sites, 24³ grid, mean-square displacements", "qpoints", []string{"estimated peak memory at least", "msd"}, func(ctx context.Context) error {
			_, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: inline(cubicSupercell(4)), Qpoints: mpGrid(false, 24, 24, 24), TemperaturesK: []float64{300}, Msd: true})
			return err
		}},
		{"8 sites, 64³ grid, mean-square displacements", "qpoints", []string{"estimated peak memory at least"}, func(ctx context.Context) error {
			_, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: inline(cubicSupercell(2)), Qpoints: mpGrid(false, 64, 64, 64), TemperaturesK: []float64{300}, Msd: true})
			return err
		}},
		{"512 sites, one q-point of eigenvectors over the message cap", "eigenvectors", []string{"1536 modes", "max-msg-bytes"}, func(ctx context.Context) error {
			_, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: inline(cubicSupercell(8)), Qpoints: qlist(0.1, 0.2, 0.3), Eigenvectors: true})
			return err
		}},
		{"64 sites, per-site DOS of 8×10⁵ samples over the message cap", "step", []string{"800001 samples × 131 series", "max-msg-bytes"}, func(ctx context.Context) error {
			_, err := ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: inline(cubicSupercell(4)), Qpoints: mpGrid(false, 4, 4, 4), PerSite: true, Max: 20, Step: 2.5e-5})
			return err
		}},
	}
	reg := ts.srv.Registry()
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			work0 := metricSum(t, reg, "modegrid_computations_total") // every kind, compile included
			q0 := metric(t, reg, "modegrid_qpoints_diagonalized_total", nil)
			err := tt.call(testContext(t))
			if status.Code(err) != codes.InvalidArgument {
				t.Fatalf("got %v; want INVALID_ARGUMENT", err)
			}
			desc := badFields(t, err)[tt.field]
			for _, w := range tt.words {
				if !strings.Contains(desc, w) {
					t.Errorf("%s: %q does not say %q", tt.field, desc, w)
				}
			}
			if w := metricSum(t, reg, "modegrid_computations_total"); w != work0 {
				t.Errorf("computations (compile included) went from %v to %v: work started", work0, w)
			}
			if q := metric(t, reg, "modegrid_qpoints_diagonalized_total", nil); q != q0 {
				t.Errorf("q-points diagonalised went from %v to %v", q0, q)
			}
		})
	}
}

// TestPrecompileRefusesLongCompile: a model whose neighbour-shell search
// alone would run past max-compute-seconds is refused before it is
// compiled, naming the shells, the pairs and the bound; an invalid model
// still gets its own violations, not this refusal.
func TestPrecompileRefusesLongCompile(t *testing.T) {
	// 216 sites, first shell: at least 7³ cells × 216² pairs = 1.6e7 pairs,
	// at least 0.064 s at compileNsPerPair.
	ts := startServer(t, Config{MaxComputeSeconds: 0.05})
	reg := ts.srv.Registry()
	_, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(cubicSupercell(6)), Qpoints: qlist(0, 0, 0)})
	desc := badFields(t, err)["model.crystal.shells"]
	for _, w := range []string{"1.6e+07 site pairs", "max-compute-seconds=0.05"} {
		if !strings.Contains(desc, w) {
			t.Errorf("model.crystal.shells: %q does not say %q", desc, w)
		}
	}
	if n := metricSum(t, reg, "modegrid_computations_total"); n != 0 {
		t.Errorf("computations = %v; want 0 (not even the compile)", n)
	}
	if n := metric(t, reg, "modegrid_admission_refused_total", map[string]string{"reason": reasonCompileTooLong}); n != 1 {
		t.Errorf("compile_too_long refusals = %v; want 1", n)
	}
	bad := cubicSupercell(6)
	bad.Sites[3].MassAmu = -1
	_, err = ts.api.ComputeDos(testContext(t), &modegridv1.ComputeDosRequest{Model: inline(bad), Qpoints: mpGrid(false, 2, 2, 2)})
	if fields := badFields(t, err); fields["model.crystal.sites[3].mass_amu"] == "" || fields["model.crystal.shells"] != "" {
		t.Errorf("invalid model: violations %v; want the mass named and no compile refusal", fields)
	}
}

// TestPrecompileBoundIsBelowTheEstimate: for every example crystal and
// supercells of 8–216 sites, on grids of every dimensionality's shape, the
// pre-compile bound never exceeds the estimate made after compiling (so a
// request refused before compiling would be refused after it too).
func TestPrecompileBoundIsBelowTheEstimate(t *testing.T) {
	svc := NewService()
	crystals := []*modegridv1.Crystal{cubicSupercell(2), cubicSupercell(4), cubicSupercell(6)}
	for _, name := range examples.Names() {
		crystals = append(crystals, example(t, name))
	}
	for _, c := range crystals {
		src := inline(c)
		r, ok := svc.rawModelOf(src)
		if !ok {
			t.Fatalf("%s: not read", c.GetName())
		}
		e, err := compileEntry(context.Background(), src, nil, physics.Limits{}, 0)
		if err != nil {
			t.Fatalf("%s: %v", c.GetName(), err)
		}
		for _, n := range []int{1, 5, 12, 24} {
			spec := mesh.GridSpec{Mesh: [3]int{n, n, n}}
			for k := e.m.Dim(); k < 3; k++ {
				spec.Mesh[k] = 1
			}
			check := func(what string, lo, hi estimate) {
				if lo.cost.Bytes > hi.cost.Bytes || lo.cost.Flops > hi.cost.Flops*(1+1e-12) {
					t.Errorf("%s %s n=%d: bound %+v above the estimate %+v", c.GetName(), what, n, lo.cost, hi.cost)
				}
			}
			for _, per := range []bool{false, true} {
				opt := spectra.DOSOptions{PerSite: per}
				check("dos", dosCost(r.grid(spec), opt), svc.dosEstimate(e, spec, opt))
				topt := thermo.ThermalOptions{TempsK: []float64{10, 300}, MSD: per}
				check("thermal", thermalCost(r.grid(spec), topt), svc.thermalEstimate(e, spec, topt))
			}
			lo, _ := svc.streamCost(r.grid(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}), n, physics.ModeOptions{Eigenvectors: true})
			hi, _ := svc.modesCost(e, n, physics.ModeOptions{Eigenvectors: true})
			check("modes", lo, hi)
		}
		check := stabilityCost(r.grid(stabilitySpec(r.size.Dim, 8)))
		if est := svc.stabilityEstimate(e, 8); check.cost.Bytes > est.cost.Bytes || check.cost.Flops > est.cost.Flops {
			t.Errorf("%s stability: bound %+v above the estimate %+v", c.GetName(), check.cost, est.cost)
		}
	}
}

// TestMinIrreducible: the largest point groups (International Tables for
// Crystallography, Vol. A, ch. 10: m3̄m has 48 operations, 6mm 12, and a
// line {1, −1}) bound the stars of a grid.
func TestMinIrreducible(t *testing.T) {
	tests := []struct{ n, dim, want int }{
		{1, 3, 1}, {48, 3, 1}, {49, 3, 2}, {160 * 160 * 160, 3, 85334},
		{12, 2, 1}, {13, 2, 2}, {100, 1, 50}, {101, 1, 51}, {0, 3, 1},
	}
	for _, tt := range tests {
		if got := minIrreducible(tt.n, tt.dim); got != tt.want {
			t.Errorf("minIrreducible(%d, %d) = %d; want %d", tt.n, tt.dim, got, tt.want)
		}
	}
}
