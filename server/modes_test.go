package server

import (
	"math"
	"math/cmplx"
	"strings"
	"testing"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

func TestModesStreamChunks(t *testing.T) {
	ts := startServer(t, Config{ChunkPoints: 5, MaxChunkBytes: 64 << 10})
	fcc := example(t, "fcc")
	tests := []struct {
		name      string
		req       *modegridv1.ComputeModesRequest
		wantTotal int
		maxChunk  int // largest chunk allowed
	}{
		{name: "default chunk", req: &modegridv1.ComputeModesRequest{Qpoints: mpGrid(false, 3, 3, 3)}, wantTotal: 27, maxChunk: 5},
		{name: "shifted grid of a chain", req: &modegridv1.ComputeModesRequest{Model: inline(example(t, "chain")), Qpoints: mpGrid(true, 8)}, wantTotal: 8, maxChunk: 5},
		{name: "asked chunk", req: &modegridv1.ComputeModesRequest{Qpoints: mpGrid(true, 2, 2, 2), ChunkSize: 3}, wantTotal: 8, maxChunk: 3},
		// 3 modes: 16·9 + 8·3 + 64 = 232 bytes a point with eigenvectors,
		// so 64 KiB holds 282 points: a 1000-point request is cut there.
		{name: "byte bound wins", req: &modegridv1.ComputeModesRequest{Qpoints: cells(10, 10, 10), ChunkSize: 1000, Eigenvectors: true}, wantTotal: 1000, maxChunk: (64 << 10) / 232},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if tt.req.Model == nil {
				tt.req.Model = inline(fcc)
			}
			chunks, err := collectModes(testContext(t), ts.api, tt.req)
			if err != nil {
				t.Fatal(err)
			}
			next := 0
			weight := 0.0
			for _, c := range chunks {
				if int(c.GetOffset()) != next {
					t.Fatalf("chunk at offset %d; want %d (q order)", c.GetOffset(), next)
				}
				if int(c.GetTotal()) != tt.wantTotal {
					t.Errorf("total %d; want %d", c.GetTotal(), tt.wantTotal)
				}
				if n := len(c.GetPoints()); n == 0 || n > tt.maxChunk {
					t.Errorf("chunk of %d points; want 1…%d", n, tt.maxChunk)
				}
				for _, p := range c.GetPoints() {
					weight += p.GetWeight()
				}
				next += len(c.GetPoints())
			}
			if next != tt.wantTotal {
				t.Errorf("streamed %d points; want %d", next, tt.wantTotal)
			}
			// Weights of a grid or finite crystal sum to 1 (proto contract).
			if math.Abs(weight-1) > 1e-12 {
				t.Errorf("weights sum to %v; want 1", weight)
			}
		})
	}
}

// TestModesEigenvectors: eigenvectors come back orthonormal (a property of
// the eigenvectors of a Hermitian matrix; Horn & Johnson, Matrix Analysis,
// §2.5), interleaved re/im, and the unit converts frequencies (1 THz =
// 4.135667697 meV = h·10¹²/e with CODATA 2018 h and e, both exact).
func TestModesEigenvectors(t *testing.T) {
	ts := startServer(t, Config{})
	c := example(t, "rocksalt-like")
	req := &modegridv1.ComputeModesRequest{Model: inline(c), Eigenvectors: true,
		Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: []*modegridv1.QPoint{{Q1: 0.1, Q2: 0.2, Q3: 0.3}}}}}}
	chunks, err := collectModes(testContext(t), ts.api, req)
	if err != nil {
		t.Fatal(err)
	}
	p := allPoints(chunks)[0]
	n := len(p.GetFrequencies())
	ev := p.GetEigenvectors()
	if len(ev) != 2*n*n {
		t.Fatalf("%d eigenvector numbers; want 2·%d²", len(ev), n)
	}
	z := func(m, c int) complex128 { return complex(ev[2*(m*n+c)], ev[2*(m*n+c)+1]) }
	for a := 0; a < n; a++ {
		for b := 0; b < n; b++ {
			var dot complex128
			for c := 0; c < n; c++ {
				dot += cmplx.Conj(z(a, c)) * z(b, c)
			}
			want := 0.0
			if a == b {
				want = 1
			}
			if cmplx.Abs(dot-complex(want, 0)) > 1e-10 {
				t.Errorf("<e%d|e%d> = %v; want %v", a, b, dot, want)
			}
		}
	}
	req.Unit = modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV
	req.Eigenvectors = false
	chunks, err = collectModes(testContext(t), ts.api, req)
	if err != nil {
		t.Fatal(err)
	}
	q := allPoints(chunks)[0]
	if chunks[0].GetUnit() != modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV || !strings.Contains(chunks[0].GetParameters(), "unit=mev") {
		t.Errorf("unit %v, parameters %q; want meV stated", chunks[0].GetUnit(), chunks[0].GetParameters())
	}
	for k := range n {
		if want := p.GetFrequencies()[k] * 4.135667697; math.Abs(q.GetFrequencies()[k]-want) > 1e-8*math.Abs(want)+1e-12 {
			t.Errorf("mode %d: %v meV; want %v", k, q.GetFrequencies()[k], want)
		}
	}
	if len(q.GetEigenvectors()) != 0 {
		t.Error("eigenvectors sent although not asked for")
	}
}

func TestModesRequestViolations(t *testing.T) {
	ts := startServer(t, Config{MaxQPoints: 100, MaxSites: 1})
	chain := example(t, "chain")
	tests := []struct {
		name string
		req  *modegridv1.ComputeModesRequest
		want []string // field paths that must be named
		cap  string   // a description must name this cap
	}{
		{name: "no model", req: &modegridv1.ComputeModesRequest{Qpoints: qlist(0)}, want: []string{"model"}},
		{name: "no q-points", req: &modegridv1.ComputeModesRequest{Model: inline(chain)}, want: []string{"qpoints"}},
		{name: "empty list", req: &modegridv1.ComputeModesRequest{Model: inline(chain), Qpoints: qlist()}, want: []string{"qpoints.list.points"}},
		{name: "components past d and NaN", req: &modegridv1.ComputeModesRequest{Model: inline(chain), Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: []*modegridv1.QPoint{{Q1: 0.1, Q2: 0.3}, {Q1: math.NaN()}}}}}},
			want: []string{"qpoints.list.points[0].q2", "qpoints.list.points[1].q1"}},
		{name: "mesh past d", req: &modegridv1.ComputeModesRequest{Model: inline(chain), Qpoints: mpGrid(false, 4, 2)}, want: []string{"qpoints.grid.mesh[1]"}},
		{name: "mesh zero", req: &modegridv1.ComputeModesRequest{Model: inline(example(t, "fcc")), Qpoints: cells(4, 0, 4)}, want: []string{"qpoints.cells.cells[1]"}},
		{name: "too many q-points", req: &modegridv1.ComputeModesRequest{Model: inline(example(t, "fcc")), Qpoints: mpGrid(false, 5, 5, 5)}, want: []string{"qpoints.grid.mesh"}, cap: "max-qpoints=100"},
		{name: "too many sites", req: &modegridv1.ComputeModesRequest{Model: inline(example(t, "rocksalt-like")), Qpoints: qlist(0)}, want: []string{"model.crystal.sites"}, cap: "max-sites=1"},
		{name: "everything at once", req: &modegridv1.ComputeModesRequest{Model: byHash("not-a-hash"), Qpoints: mpGrid(false, 0), Unit: 42},
			want: []string{"model.model_hash", "qpoints.grid.mesh[0]", "unit"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := collectModes(testContext(t), ts.api, tt.req)
			fields := badFields(t, err)
			for _, f := range tt.want {
				if _, ok := fields[f]; !ok {
					t.Errorf("violations %v do not name %s", fields, f)
				}
			}
			if tt.cap != "" {
				found := false
				for _, d := range fields {
					found = found || strings.Contains(d, tt.cap)
				}
				if !found {
					t.Errorf("violations %v do not name the cap %s", fields, tt.cap)
				}
			}
		})
	}
}

// TestModesGroupVelocities: the monatomic chain's group velocity is
// dω/dk = a·sqrt(K/M)·cos(ka/2) along the chain (Kittel, Introduction to
// Solid State Physics, ch. 4), with sqrt(eV/Å²/amu) = 9.82269475025e13
// rad/s (sqrt(e·10²⁰/m_u) with CODATA 2018 e and m_u); to 1e-6 relative.
func TestModesGroupVelocities(t *testing.T) {
	ts := startServer(t, Config{})
	c := example(t, "chain")
	K, M, a := c.GetSprings()[0].GetKLong(), c.GetSites()[0].GetMassAmu(), c.GetLattice()[0].GetX()
	qs := []float64{0.05, 0.2, 0.3, 0.45}
	chunks, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(c), Qpoints: qlist(qs...), GroupVelocities: true})
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(chunks[0].GetParameters(), "group_velocities=true") {
		t.Errorf("parameters %q do not record the velocities", chunks[0].GetParameters())
	}
	for i, p := range allPoints(chunks) {
		v := p.GetGroupVelocitiesKmS()
		if len(v) != 3 {
			t.Fatalf("q=%v: %d velocity numbers; want 3 (one mode)", qs[i], len(v))
		}
		// a [Å]·1e-10 m/Å · ω-unit [rad/s] · sqrt(K/M) · cos(πq) / 1000 → km/s.
		want := a * 1e-10 * 9.82269475025e13 * math.Sqrt(K/M) * math.Cos(math.Pi*qs[i]) / 1000
		if math.Abs(v[0]-want) > 1e-6*math.Abs(want) || v[1] != 0 || v[2] != 0 {
			t.Errorf("q=%v: velocity %v km/s; want (%v, 0, 0)", qs[i], v, want)
		}
	}
}
