package server

import (
	"net"
	"testing"

	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
	rediscache "github.com/materials-lab/modegrid/server/cache/redis"
	"github.com/materials-lab/modegrid/server/internal/testredis"
)

// TestRedisBackendSharedByReplicas: two replicas share a real Redis. What
// one computed the other answers from the backend, and a model sent to one
// is referable by hash on the other.
func TestRedisBackendSharedByReplicas(t *testing.T) {
	addr := testredis.Start(t, "")
	replica := func() *testServer {
		r := rediscache.New(rediscache.Options{Addr: addr})
		t.Cleanup(func() { r.Close() })
		return startServer(t, Config{Backend: r})
	}
	a, b := replica(), replica()
	ctx := testContext(t)
	req := &modegridv1.ComputeDosRequest{Model: inline(example(t, "square-net")), Qpoints: mpGrid(false, 12, 12)}
	want, err := a.api.ComputeDos(ctx, req)
	if err != nil {
		t.Fatal(err)
	}
	got, err := b.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: byHash(want.GetModelHash()), Qpoints: mpGrid(false, 12, 12)})
	if err != nil {
		t.Fatalf("replica b, model by hash: %v", err)
	}
	if !proto.Equal(got, want) {
		t.Error("replica b answered differently")
	}
	reg := b.srv.Registry()
	if n := metric(t, reg, "modegrid_cache_hits_total", map[string]string{"kind": kindModel, "level": "backend"}); n != 1 {
		t.Errorf("b: model backend hits %v; want 1", n)
	}
	if n := metric(t, reg, "modegrid_cache_hits_total", map[string]string{"kind": kindDOS, "level": "backend"}); n != 1 {
		t.Errorf("b: DOS backend hits %v; want 1", n)
	}
	if n := metric(t, reg, "modegrid_computations_total", map[string]string{"kind": kindDOS}); n != 0 {
		t.Errorf("b computed the DOS %v times; want 0", n)
	}
}

// TestBackendDownNeverFails: with Redis unreachable every request is
// computed and answered; the failures are counted.
func TestBackendDownNeverFails(t *testing.T) {
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	dead := lis.Addr().String()
	lis.Close() // nothing listens here now
	r := rediscache.New(rediscache.Options{Addr: dead})
	t.Cleanup(func() { r.Close() })
	ts := startServer(t, Config{Backend: r})
	ctx := testContext(t)
	for range 2 {
		if _, err := ts.api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: inline(example(t, "chain")), Qpoints: mpGrid(false, 64)}); err != nil {
			t.Fatalf("with the backend down: %v", err)
		}
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_cache_backend_errors_total", map[string]string{"kind": kindDOS}); n < 1 {
		t.Errorf("DOS backend errors %v; want ≥ 1", n)
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_cache_hits_total", map[string]string{"kind": kindDOS, "level": "memory"}); n != 1 {
		t.Errorf("DOS memory hits %v; want 1 (the second request)", n)
	}
}

// TestBackendSkipsLargeValues: a result over the backend's per-entry cap
// stays in memory only and is counted.
func TestBackendSkipsLargeValues(t *testing.T) {
	r := rediscache.New(rediscache.Options{Addr: testredis.Start(t, ""), MaxEntryBytes: 100})
	t.Cleanup(func() { r.Close() })
	ts := startServer(t, Config{Backend: r})
	if _, err := ts.api.ComputeDos(testContext(t), &modegridv1.ComputeDosRequest{Model: inline(example(t, "chain")), Qpoints: mpGrid(false, 32)}); err != nil {
		t.Fatal(err)
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_cache_backend_skipped_total", nil); n < 1 {
		t.Errorf("skipped %v; want ≥ 1 (a 500-sample DOS is over 100 bytes)", n)
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_cache_backend_errors_total", map[string]string{"kind": kindDOS}); n != 0 {
		t.Errorf("backend errors %v; want 0 (skipping is not an error)", n)
	}
}
