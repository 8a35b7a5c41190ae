package deploy

import (
	"context"
	"fmt"
	"math/rand/v2"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	dto "github.com/prometheus/client_model/go"
	"google.golang.org/grpc"
	"google.golang.org/grpc/resolver"
	"google.golang.org/grpc/resolver/manual"
	"google.golang.org/grpc/stats"
	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// replicaTarget returns a gRPC target and dial option that resolve to the
// given replicas through a manual resolver, as DNS of a headless Service
// would resolve to every ready pod.
func replicaTarget(ds ...*daemon) (string, grpc.DialOption) {
	r := manual.NewBuilderWithScheme(fmt.Sprintf("replicas%d", replicaSchemes.Add(1)))
	var eps []resolver.Endpoint
	for _, d := range ds {
		eps = append(eps, resolver.Endpoint{Addresses: []resolver.Address{{Addr: d.grpcAddr}}})
	}
	r.InitialState(resolver.State{Endpoints: eps})
	return r.Scheme() + ":///modegrid", grpc.WithResolvers(r)
}

var replicaSchemes atomic.Int64

// attemptCounter counts client RPC attempts (a retried call makes several)
// and failed attempts, through gRPC's stats handler.
type attemptCounter struct {
	attempts, failed atomic.Int64
}

func (a *attemptCounter) TagRPC(ctx context.Context, _ *stats.RPCTagInfo) context.Context { return ctx }
func (a *attemptCounter) HandleRPC(_ context.Context, s stats.RPCStats) {
	switch s := s.(type) {
	case *stats.Begin:
		a.attempts.Add(1)
	case *stats.End:
		if s.Error != nil {
			a.failed.Add(1)
		}
	}
}
func (a *attemptCounter) TagConn(ctx context.Context, _ *stats.ConnTagInfo) context.Context {
	return ctx
}
func (a *attemptCounter) HandleConn(context.Context, stats.ConnStats) {}

// runCalls sends calls over c from workers goroutines and returns each
// call's result and error by index. after, if set, runs once on its own
// goroutine when `at` calls have completed.
func runCalls(ctx context.Context, c *client.Client, calls []call, workers int, at int, after func()) ([]proto.Message, []error) {
	results := make([]proto.Message, len(calls))
	errs := make([]error, len(calls))
	next := make(chan int)
	var done atomic.Int64
	var wg sync.WaitGroup
	var afterWG sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				results[i], errs[i] = calls[i].do(ctx, c)
				if n := done.Add(1); after != nil && int(n) == at {
					afterWG.Add(1)
					go func() { defer afterWG.Done(); after() }()
				}
			}
		}()
	}
	for i := range calls {
		next <- i
	}
	close(next)
	wg.Wait()
	afterWG.Wait()
	return results, errs
}

// handled is a replica's total of finished gRPC calls of the modegrid
// service.
func handled(fams map[string]*dto.MetricFamily) float64 {
	return sumMetric(fams, "grpc_server_handled_total", map[string]string{"grpc_service": serviceName})
}

// TestReplicaFailure: three modegridd processes share one Redis; the Go
// client balances round_robin over all three (its default, with retries
// on UNAVAILABLE); a bounded mixed load of 3000 requests runs from 8
// workers, and one replica is killed with SIGKILL a third of the way in.
// Every call must succeed, and every result must be identical (proto.Equal)
// to the result of the same request on a single server with no cache
// sharing.
func TestReplicaFailure(t *testing.T) {
	const n, workers = 3000, 8
	ctx := testContext(t, 90*time.Second)
	models := workloadModels(t, 3)
	calls := mixedWorkload(rand.New(rand.NewPCG(8, 3000)), models, n)

	// Reference: one server, no Redis.
	single := startDaemon(t, daemonConfig{name: "single"})
	want, errs := runCalls(ctx, dialClient(t, single.grpcAddr), calls, workers, 0, nil)
	for i, err := range errs {
		if err != nil {
			t.Fatalf("single server, call %d (%s): %v", i, calls[i].name, err)
		}
	}
	single.kill()

	redis := startRedis(t)
	var ds []*daemon
	for i := range 3 {
		ds = append(ds, startDaemon(t, daemonConfig{name: fmt.Sprintf("replica-%d", i), redis: redis.addr}))
	}
	target, resolverOpt := replicaTarget(ds...)
	var counter attemptCounter
	cl := dialClient(t, target, client.WithDialOptions(resolverOpt, grpc.WithStatsHandler(&counter)))
	victim := ds[1]
	var victimHandled float64
	got, errs := runCalls(ctx, cl, calls, workers, n/3, func() {
		if fams, err := victim.metrics(ctx); err == nil {
			victimHandled = handled(fams)
		}
		victim.kill()
	})
	failed := 0
	for i, err := range errs {
		if err != nil {
			failed++
			if failed <= 5 {
				t.Errorf("call %d (%s) failed: %v", i, calls[i].name, err)
			}
		}
	}
	if failed > 0 {
		t.Fatalf("%d of %d calls failed; want 0", failed, n)
	}
	t.Logf("%d calls, %d workers: %d attempts (%d failed attempts retried); killed replica had handled %.0f calls",
		n, workers, counter.attempts.Load(), counter.failed.Load(), victimHandled)
	differ := map[string]int{} // by RPC
	nDiffer := 0
	for i := range calls {
		if !proto.Equal(got[i], want[i]) {
			differ[strings.Fields(calls[i].name)[0]]++
			if nDiffer++; nDiffer <= 3 {
				t.Errorf("call %d (%s): result differs from the single server's", i, calls[i].name)
			}
		}
	}
	if len(differ) > 0 {
		t.Fatalf("results differing from a single-server run, by RPC: %v (of %d calls)", differ, n)
	}
	select {
	case <-victim.done:
	default:
		t.Fatal("the victim replica is still running")
	}
	if victimHandled == 0 {
		t.Error("the killed replica had handled no call before it died: the client did not balance over it")
	}
	for _, d := range []*daemon{ds[0], ds[2]} {
		fams, err := d.metrics(ctx)
		if err != nil {
			t.Fatal(err)
		}
		if h := handled(fams); h == 0 {
			t.Errorf("%s handled no call", d.name)
		}
	}
}

// cacheCounts are replicas' cache counters summed over some cache kinds.
type cacheCounts struct {
	memoryHits, backendHits, misses, computations float64
}

// resultKinds are the cache kinds of results (the compiled-model kinds
// "model" and "inline", and "check", are left out: they measure model
// reuse, not result reuse).
var resultKinds = []string{"grid", "dispersion", "dos", "thermal"}

func resultCache(t testing.TB, ctx context.Context, ds ...*daemon) cacheCounts {
	t.Helper()
	return cacheOf(t, ctx, resultKinds, ds...)
}

func cacheOf(t testing.TB, ctx context.Context, kinds []string, ds ...*daemon) cacheCounts {
	t.Helper()
	var c cacheCounts
	for _, d := range ds {
		fams, err := d.metrics(ctx)
		if err != nil {
			t.Fatal(err)
		}
		for _, k := range kinds {
			c.memoryHits += sumMetric(fams, "modegrid_cache_hits_total", map[string]string{"kind": k, "level": "memory"})
			c.backendHits += sumMetric(fams, "modegrid_cache_hits_total", map[string]string{"kind": k, "level": "backend"})
			c.misses += sumMetric(fams, "modegrid_cache_misses_total", map[string]string{"kind": k})
			c.computations += sumMetric(fams, "modegrid_computations_total", map[string]string{"kind": k})
		}
	}
	return c
}

// dosRequest is a density-of-states request on an n-mesh of an example.
func dosRequest(t testing.TB, name string, n uint32) *modegridv1.ComputeDosRequest {
	c := example(t, name)
	return &modegridv1.ComputeDosRequest{Model: client.Inline(c), Qpoints: mesh(c, n)}
}

// thermalAt is a thermal request at one temperature, a fresh cache key for
// each temperature.
func thermalAt(t testing.TB, tempK float64) *modegridv1.ComputeThermalRequest {
	c := example(t, "fcc")
	return &modegridv1.ComputeThermalRequest{Model: client.Inline(c), Qpoints: mesh(c, 4), TemperaturesK: []float64{tempK}}
}

// TestSharedRedis: two replicas share one Redis. A result computed on
// replica A is served by replica B from Redis (a backend hit, no
// computation on B, an identical answer). With Redis killed, requests to
// both still succeed and the replicas count backend errors; with Redis
// restarted, results stored by one replica are again served to the other.
func TestSharedRedis(t *testing.T) {
	ctx := testContext(t, 60*time.Second)
	redis := startRedis(t)
	a := startDaemon(t, daemonConfig{name: "replica-a", redis: redis.addr})
	b := startDaemon(t, daemonConfig{name: "replica-b", redis: redis.addr})
	ca, cb := dialClient(t, a.grpcAddr), dialClient(t, b.grpcAddr)

	t.Run("computed on A, served by B", func(t *testing.T) {
		req := dosRequest(t, "fcc", 8)
		ra, err := ca.DOS(ctx, req)
		if err != nil {
			t.Fatal(err)
		}
		before := resultCache(t, ctx, b)
		rb, err := cb.DOS(ctx, req)
		if err != nil {
			t.Fatal(err)
		}
		after := resultCache(t, ctx, b)
		if got := after.backendHits - before.backendHits; got != 1 {
			t.Errorf("B's backend hits rose by %v; want 1", got)
		}
		if got := after.computations - before.computations; got != 0 {
			t.Errorf("B computed %v results; want 0 (served from Redis)", got)
		}
		if !proto.Equal(ra, rb) {
			t.Error("B's answer from Redis differs from A's computed answer")
		}
	})

	errorsOf := func(d *daemon) float64 {
		fams, err := d.metrics(ctx)
		if err != nil {
			t.Fatal(err)
		}
		return sumMetric(fams, "modegrid_cache_backend_errors_total", nil)
	}

	t.Run("Redis killed", func(t *testing.T) {
		redis.kill()
		for i := range 20 {
			req := thermalAt(t, float64(100+i))
			ra, err := ca.Thermal(ctx, req)
			if err != nil {
				t.Fatalf("A with Redis down: %v", err)
			}
			rb, err := cb.Thermal(ctx, req)
			if err != nil {
				t.Fatalf("B with Redis down: %v", err)
			}
			if !proto.Equal(ra, rb) {
				t.Fatalf("request %d: A and B disagree", i)
			}
		}
		for _, d := range []*daemon{a, b} {
			if n := errorsOf(d); n == 0 {
				t.Errorf("%s counted no backend errors with Redis down", d.name)
			}
		}
	})

	t.Run("Redis back", func(t *testing.T) {
		redis.start()
		// go-redis redials a dead server in the background about once a
		// second; poll with fresh keys until B is served what A stored.
		i := 0
		poll(t, ctx, "backend hits resume", func() (bool, error) {
			i++
			req := thermalAt(t, float64(1000+i))
			if _, err := ca.Thermal(ctx, req); err != nil {
				return false, err
			}
			before := resultCache(t, ctx, b)
			if _, err := cb.Thermal(ctx, req); err != nil {
				return false, err
			}
			return resultCache(t, ctx, b).backendHits > before.backendHits, nil
		})
	})
}

// TestCacheAffinity measures the result-cache hit ratio of three replicas
// (no Redis) under one repeated workload, once with the client's default
// round_robin and once with WithModelAffinity (ring_hash on the model
// hash). Affinity sends every model's calls to one replica, so each
// distinct request is computed once instead of up to once per replica. The
// ratio counts the lookups of kind "dos", one per call (a DOS miss also
// looks up the grid's modes, which would count twice).
func TestCacheAffinity(t *testing.T) {
	const n = 600
	ctx := testContext(t, 60*time.Second)
	models := workloadModels(t, 3)
	rng := rand.New(rand.NewPCG(8, 600))
	var calls []call
	distinct := map[string]bool{}
	for range n {
		m := models[rng.IntN(len(models))]
		meshN := []uint32{4, 6, 8}[rng.IntN(3)]
		req := &modegridv1.ComputeDosRequest{Model: client.Inline(m), Qpoints: mesh(m, meshN)}
		name := fmt.Sprintf("dos %d %s", meshN, m.GetName())
		distinct[name] = true
		calls = append(calls, call{name: name, do: func(ctx context.Context, c *client.Client) (proto.Message, error) { return c.DOS(ctx, req) }})
	}
	measure := func(t *testing.T, opts ...client.Option) cacheCounts {
		var ds []*daemon
		for i := range 3 {
			ds = append(ds, startDaemon(t, daemonConfig{name: fmt.Sprintf("replica-%d", i)}))
		}
		target, resolverOpt := replicaTarget(ds...)
		cl := dialClient(t, target, append(opts, client.WithDialOptions(resolverOpt))...)
		_, errs := runCalls(ctx, cl, calls, 1, 0, nil)
		for i, err := range errs {
			if err != nil {
				t.Fatalf("call %d (%s): %v", i, calls[i].name, err)
			}
		}
		return cacheOf(t, ctx, []string{"dos"}, ds...)
	}
	ratio := func(c cacheCounts) float64 { return c.memoryHits / (c.memoryHits + c.misses) }
	var rr, aff cacheCounts
	t.Run("round_robin", func(t *testing.T) { rr = measure(t) })
	t.Run("ring_hash by model", func(t *testing.T) { aff = measure(t, client.WithModelAffinity()) })
	t.Logf("%d calls, %d distinct requests over %d models, 3 replicas:", n, len(distinct), len(models))
	t.Logf("  round_robin:        hit ratio %.3f (%v hits, %v misses)", ratio(rr), rr.memoryHits, rr.misses)
	t.Logf("  ring_hash by model: hit ratio %.3f (%v hits, %v misses)", ratio(aff), aff.memoryHits, aff.misses)
	if got := aff.memoryHits + aff.misses; got != n {
		t.Errorf("with affinity %v DOS lookups; want one per call (%d)", got, n)
	}
	if aff.misses > float64(len(distinct)) {
		t.Errorf("with affinity %v misses; want at most one per distinct request (%d)", aff.misses, len(distinct))
	}
	if ratio(aff) <= ratio(rr) {
		t.Errorf("affinity hit ratio %.3f not above round_robin's %.3f", ratio(aff), ratio(rr))
	}
}
