package server

import (
	"testing"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// TestModelByHash: a model sent once is referable by the hash of the
// response; an unknown hash is NOT_FOUND naming it.
func TestModelByHash(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	chunks, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: inline(example(t, "diatomic-chain")), Qpoints: qlist(0.25)})
	if err != nil {
		t.Fatal(err)
	}
	h := chunks[0].GetModelHash()
	ref, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: byHash(h), Qpoints: qlist(0.25)})
	if err != nil {
		t.Fatalf("reference by hash: %v", err)
	}
	if ref[0].GetModelHash() != h {
		t.Errorf("reference answered with hash %s; want %s", ref[0].GetModelHash(), h)
	}
	a, b := allPoints(chunks)[0].GetFrequencies(), allPoints(ref)[0].GetFrequencies()
	for k := range a {
		if a[k] != b[k] {
			t.Errorf("mode %d: inline %v, by hash %v; want identical", k, a[k], b[k])
		}
	}
	unknown := "0123456789abcdef0123456789abcdef0123456789abcdef0123456789abcdef"
	_, err = collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: byHash(unknown), Qpoints: qlist(0.25)})
	assertNotFound(t, err, unknown)
}

func assertNotFound(t *testing.T, err error, hash string) {
	t.Helper()
	st := status.Convert(err)
	if st.Code() != codes.NotFound {
		t.Fatalf("got %v; want NotFound", err)
	}
	for _, d := range st.Details() {
		if ri, ok := d.(*errdetails.ResourceInfo); ok && ri.GetResourceName() == hash {
			return
		}
	}
	t.Errorf("NotFound %v carries no ResourceInfo naming %s", err, hash)
}

// TestEvictedReference: with a cache that holds one model, sending a
// second model evicts the first; its reference is then NOT_FOUND, and
// resending it inline makes it referable again.
func TestEvictedReference(t *testing.T) {
	ctx := testContext(t)
	modelBytes := func(name string) float64 {
		probe := startServer(t, Config{})
		if _, err := collectModes(ctx, probe.api, &modegridv1.ComputeModesRequest{Model: inline(example(t, name)), Qpoints: qlist(0)}); err != nil {
			t.Fatal(err)
		}
		return metric(t, probe.srv.Registry(), "modegrid_cache_bytes", map[string]string{"kind": "model"})
	}
	// A model is charged under two keys (inline bytes and hash): the bound
	// holds the fcc model twice but not the chain beside it.
	bound := int64(2*modelBytes("fcc") + modelBytes("chain")/2)
	ts := startServer(t, Config{CacheBytes: bound})
	send := func(name string) string {
		chunks, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: inline(example(t, name)), Qpoints: qlist(0)})
		if err != nil {
			t.Fatal(err)
		}
		return chunks[0].GetModelHash()
	}
	ref := func(h string) error {
		_, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: byHash(h), Qpoints: qlist(0)})
		return err
	}
	first := send("chain")
	if err := ref(first); err != nil {
		t.Fatalf("reference before eviction: %v", err)
	}
	send("fcc")
	if ev := metric(t, ts.srv.Registry(), "modegrid_cache_evictions_total", map[string]string{"kind": "model"}); ev < 1 {
		t.Errorf("model evictions %v; want ≥ 1", ev)
	}
	if b := metric(t, ts.srv.Registry(), "modegrid_cache_bytes", map[string]string{"kind": "model"}) +
		metric(t, ts.srv.Registry(), "modegrid_cache_bytes", map[string]string{"kind": "inline"}); b > float64(bound) {
		t.Errorf("cache holds %v bytes of models; bound %d", b, bound)
	}
	assertNotFound(t, ref(first), first)
	if again := send("chain"); again != first {
		t.Errorf("resent model has hash %s; want %s", again, first)
	}
	if err := ref(first); err != nil {
		t.Errorf("reference after resending: %v", err)
	}
}
