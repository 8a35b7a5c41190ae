package server

// Memory accounting under load: the cache's byte bound is only a
// memory bound if every entry is charged at least the memory it holds. The
// load runs themselves are in client/cmd/modegrid-load (load_test.go).

import (
	"context"
	"runtime"
	"testing"

	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// heapPerCopy is the live heap, bytes, that one of n decoded copies of b
// as msg's type holds (the average over n, after collections).
func heapPerCopy(t *testing.T, b []byte, newMsg func() proto.Message, n int) float64 {
	t.Helper()
	keep := make([]proto.Message, n)
	before := heapAfterGC()
	for i := range keep {
		keep[i] = newMsg()
		if err := proto.Unmarshal(b, keep[i]); err != nil {
			t.Fatal(err)
		}
	}
	after := heapAfterGC()
	runtime.KeepAlive(keep)
	return (float64(after) - float64(before) - float64(8*n)) / float64(n)
}

// TestCacheChargesResultMemory: the bytes the cache charges a cached
// response are at least the memory the decoded message holds (measured
// as the live heap of many copies), and at most twice it; the same for the
// modes on a grid. Responses of every cached kind, small and large. (The
// charge used to be 256 bytes + twice the wire size: 0.38× of the memory
// of a short dispersion, 1.9× of a DOS.)
func TestCacheChargesResultMemory(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	chain, fcc, rs := example(t, "chain"), example(t, "fcc"), example(t, "rocksalt-like")
	corners := []*modegridv1.PathPoint{{Label: "G", Q: &modegridv1.QPoint{}}, {Label: "X", Q: &modegridv1.QPoint{Q1: 0.5}}}
	type resp struct {
		name string
		get  func() (proto.Message, error)
		new  func() proto.Message
	}
	tests := []resp{
		{"check", func() (proto.Message, error) {
			return ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: inline(fcc)})
		}, func() proto.Message { return &modegridv1.CheckModelResponse{} }},
		{"dispersion, 101 samples, 1 branch", func() (proto.Message, error) {
			return ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: inline(chain), Path: corners, Points: 101})
		}, func() proto.Message { return &modegridv1.ComputeDispersionResponse{} }},
		{"dispersion, 2000 samples, 6 branches", func() (proto.Message, error) {
			return ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: inline(rs), Path: corners, Points: 2000})
		}, func() proto.Message { return &modegridv1.ComputeDispersionResponse{} }},
		{"dos, default bins", func() (proto.Message, error) {
			return ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: inline(fcc), Qpoints: mpGrid(false, 8, 8, 8)})
		}, func() proto.Message { return &modegridv1.ComputeDosResponse{} }},
		{"dos, per site", func() (proto.Message, error) {
			return ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: inline(rs), Qpoints: mpGrid(false, 8, 8, 8), PerSite: true})
		}, func() proto.Message { return &modegridv1.ComputeDosResponse{} }},
		{"thermal, 1 temperature", func() (proto.Message, error) {
			return ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: inline(fcc), Qpoints: mpGrid(false, 8, 8, 8), TemperaturesK: []float64{300}})
		}, func() proto.Message { return &modegridv1.ComputeThermalResponse{} }},
		{"thermal, 101 temperatures with msd", func() (proto.Message, error) {
			return ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: inline(rs), Qpoints: mpGrid(false, 6, 6, 6), Msd: true,
				Range: &modegridv1.TemperatureRange{StartK: 0, StopK: 1000, StepK: 10}})
		}, func() proto.Message { return &modegridv1.ComputeThermalResponse{} }},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m, err := tt.get()
			if err != nil {
				t.Fatal(err)
			}
			b, err := proto.Marshal(m)
			if err != nil {
				t.Fatal(err)
			}
			// Enough copies to hold some MiB, so the heap measures them.
			real := heapPerCopy(t, b, tt.new, max(200, (8<<20)/max(len(b), 1)))
			charged := float64(resultBytes(m))
			t.Logf("charged %.0f B for %.0f B of heap (%.2f×), wire %d B", charged, real, charged/real, len(b))
			if charged < real || charged > 2*real {
				t.Errorf("charged %.0f bytes for a message holding %.0f; want between 1× and 2× of it", charged, real)
			}
		})
	}
	t.Run("grid modes", func(t *testing.T) {
		for _, name := range []string{"chain", "square-net", "fcc", "rocksalt-like"} {
			m, err := physics.Compile(context.Background(), crystalFromProto(example(t, name)), physics.Options{})
			if err != nil {
				t.Fatal(err)
			}
			n := map[int]int{1: 4096, 2: 64, 3: 16}[m.Dim()]
			spec := mesh.GridSpec{Mesh: [3]int{1, 1, 1}}
			for k := range m.Dim() {
				spec.Mesh[k] = n
			}
			cache := mesh.NewReductionCache(64 << 20)
			for _, opt := range []physics.GridOptions{{Cache: cache}, {Projections: true, Cache: cache}, {Eigenvectors: true, Cache: cache}} {
				// Reduce the grid once first: the reduction is kept in the
				// reduction cache (the server's, charged to its memory
				// budget), shared by every model.
				if _, err := m.GridModes(context.Background(), spec, opt); err != nil {
					t.Fatal(err)
				}
				before := heapAfterGC()
				g, err := m.GridModes(context.Background(), spec, opt)
				if err != nil {
					t.Fatal(err)
				}
				real := float64(heapAfterGC()) - float64(before)
				charged := float64(gridBytes(g))
				runtime.KeepAlive(g)
				// 0.9: the reduction a reduced grid points to (6 bytes per
				// point) belongs to the reduction cache, bounded separately,
				// and is not charged here.
				if charged < 0.9*real || charged > 2*real {
					t.Errorf("%s %+v: charged %.0f bytes for %.0f of heap; want between 0.9× and 2×", name, opt, charged, real)
				}
			}
		}
	})
}
