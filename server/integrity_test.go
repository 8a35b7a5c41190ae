package server

import (
	"context"
	"log/slog"
	"net"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/redis/go-redis/v9"
	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
	"github.com/materials-lab/modegrid/server/cache"
	rediscache "github.com/materials-lab/modegrid/server/cache/redis"
	"github.com/materials-lab/modegrid/server/internal/testredis"
)

// stepClock is a clock that moves only when the test says so.
type stepClock struct {
	mu  sync.Mutex // protects now
	now time.Time
}

func (c *stepClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.now
}

func (c *stepClock) advance(d time.Duration) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.now = c.now.Add(d)
}

// logLines returns the lines of buf whose message starts with msg.
func logLines(buf *syncBuffer, msg string) []string {
	var out []string
	for _, l := range buf.lines() {
		if strings.Contains(l, `"msg":"`+msg) {
			out = append(out, l)
		}
	}
	return out
}

// redisKeyOf returns the one Redis key of kind whose parameters contain
// part.
func redisKeyOf(t *testing.T, ctx context.Context, admin *redis.Client, kind, part string) string {
	t.Helper()
	keys, err := admin.Keys(ctx, rediscache.KeyPrefix+"*/"+kind+"/*").Result()
	if err != nil {
		t.Fatal(err)
	}
	var found []string
	for _, k := range keys {
		if strings.Contains(k, part) {
			found = append(found, k)
		}
	}
	if len(found) != 1 {
		t.Fatalf("Redis keys of %s containing %q: %v (all: %v); want one", kind, part, found, keys)
	}
	return found[0]
}

// TestPoisonedRedisRefused: a real Redis holding, under one request's key,
// another request's answer or a tampered copy of the right answer. A fresh
// replica asked over gRPC refuses the entry (counted by reason, logged
// once), computes the right answer, answers it, and stores it back so the
// next replica reads the good value.
func TestPoisonedRedisRefused(t *testing.T) {
	addr := testredis.Start(t, "")
	ctx := testContext(t)
	replica := func(log *slog.Logger) *testServer {
		r := rediscache.New(rediscache.Options{Addr: addr})
		t.Cleanup(func() { r.Close() })
		return startServer(t, Config{Backend: r, Logger: log})
	}
	reqA := &modegridv1.ComputeDosRequest{Model: inline(example(t, "chain")), Qpoints: mpGrid(false, 64)}
	reqB := &modegridv1.ComputeDosRequest{Model: inline(example(t, "chain")), Qpoints: mpGrid(false, 48)}
	first := replica(nil)
	wantA, err := first.api.ComputeDos(ctx, reqA)
	if err != nil {
		t.Fatal(err)
	}
	wantB, err := first.api.ComputeDos(ctx, reqB)
	if err != nil {
		t.Fatal(err)
	}
	if proto.Equal(wantA, wantB) {
		t.Fatal("the two requests have equal answers; the test needs different ones")
	}
	admin := redis.NewClient(&redis.Options{Addr: addr})
	t.Cleanup(func() { admin.Close() })
	keyA, keyB := redisKeyOf(t, ctx, admin, kindDOS, "mp:64x"), redisKeyOf(t, ctx, admin, kindDOS, "mp:48x")
	goodA, err := admin.Get(ctx, keyA).Bytes()
	if err != nil {
		t.Fatal(err)
	}
	valueB, err := admin.Get(ctx, keyB).Bytes()
	if err != nil {
		t.Fatal(err)
	}
	tampered := append([]byte(nil), goodA...)
	tampered[len(tampered)/2] ^= 0x40 // a byte of the DOS samples, mid-payload

	tests := []struct {
		name   string
		poison []byte
		reason string
	}{
		{name: "another request's value under the key", poison: valueB, reason: cache.ReasonKeyMismatch},
		{name: "tampered payload", poison: tampered, reason: cache.ReasonChecksum},
		{name: "raw protobuf without envelope", poison: mustMarshal(t, wantB), reason: cache.ReasonDecode},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if err := admin.Set(ctx, keyA, tc.poison, time.Hour).Err(); err != nil {
				t.Fatal(err)
			}
			var buf syncBuffer
			ts := replica(slog.New(slog.NewJSONHandler(&buf, nil)))
			got, err := ts.api.ComputeDos(ctx, reqA)
			if err != nil {
				t.Fatalf("ComputeDos with a poisoned cache: %v", err)
			}
			if !proto.Equal(got, wantA) {
				t.Fatalf("answered %s; want the answer to the request asked (grid 64)", got.GetParameters())
			}
			reg := ts.srv.Registry()
			if n := metric(t, reg, "modegrid_cache_integrity_failures_total", map[string]string{"tier": cache.TierShared, "reason": tc.reason}); n != 1 {
				t.Errorf("integrity failures {shared, %s} = %v; want 1", tc.reason, n)
			}
			if n := metric(t, reg, "modegrid_computations_total", map[string]string{"kind": kindDOS}); n != 1 {
				t.Errorf("DOS computations %v; want 1 (the refused value recomputed)", n)
			}
			if n := metric(t, reg, "modegrid_cache_hits_total", map[string]string{"kind": kindDOS, "level": "backend"}); n != 0 {
				t.Errorf("DOS backend hits %v; want 0", n)
			}
			if lines := logLines(&buf, "cache entry refused"); len(lines) != 1 || !strings.Contains(lines[0], `"reason":"`+tc.reason+`"`) {
				t.Errorf("log lines about the refused entry: %q; want one naming reason %s", lines, tc.reason)
			}
			// The recomputed answer replaced the poison.
			next := replica(nil)
			again, err := next.api.ComputeDos(ctx, reqA)
			if err != nil || !proto.Equal(again, wantA) {
				t.Fatalf("next replica: %v (equal %v)", err, proto.Equal(again, wantA))
			}
			if n := metric(t, next.srv.Registry(), "modegrid_cache_hits_total", map[string]string{"kind": kindDOS, "level": "backend"}); n != 1 {
				t.Errorf("next replica: DOS backend hits %v; want 1 (the good value stored back)", n)
			}
		})
	}
}

func mustMarshal(t *testing.T, m proto.Message) []byte {
	t.Helper()
	b, err := proto.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestBackendOutageLogBounded: with Redis unreachable every lookup and
// store fails; each failure is counted, but the log gets one line, and
// then one more (with the count held back) only once the log interval
// has passed on the limiter's clock.
func TestBackendOutageLogBounded(t *testing.T) {
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	dead := lis.Addr().String()
	lis.Close() // nothing listens here now
	r := rediscache.New(rediscache.Options{Addr: dead})
	t.Cleanup(func() { r.Close() })
	var buf syncBuffer
	ts := startServer(t, Config{Backend: r, Logger: slog.New(slog.NewJSONHandler(&buf, nil))})
	clock := &stepClock{now: time.Date(2030, 1, 1, 0, 0, 0, 0, time.UTC)}
	ts.srv.svc.backendLog.setClock(clock.Now)
	ctx := testContext(t)
	const calls = 150
	call := func(i int) {
		t.Helper()
		req := &modegridv1.ComputeDosRequest{Model: inline(example(t, "chain")), Qpoints: mpGrid(false, uint32(16+i))}
		if _, err := ts.api.ComputeDos(ctx, req); err != nil {
			t.Fatalf("call %d with Redis down: %v", i, err)
		}
	}
	for i := range calls {
		call(i)
	}
	reg := ts.srv.Registry()
	// Per call: the DOS lookup and the DOS store fail; once: storing the model.
	dosErrs := metric(t, reg, "modegrid_cache_backend_errors_total", map[string]string{"kind": kindDOS})
	modelErrs := metric(t, reg, "modegrid_cache_backend_errors_total", map[string]string{"kind": kindModel})
	if dosErrs != 2*calls || modelErrs != 1 {
		t.Errorf("backend errors: dos %v, model %v; want %d and 1", dosErrs, modelErrs, 2*calls)
	}
	if lines := logLines(&buf, "cache backend error"); len(lines) != 1 {
		t.Fatalf("%d log lines for %v failures; want 1:\n%s", len(lines), dosErrs+modelErrs, strings.Join(lines, "\n"))
	}
	clock.advance(cacheLogEvery)
	call(calls)
	lines := logLines(&buf, "cache backend error")
	if len(lines) != 2 {
		t.Fatalf("%d log lines after the interval; want 2", len(lines))
	}
	// Held back between the two lines: every failure but the first.
	if want := `"suppressed":300`; !strings.Contains(lines[1], want) {
		t.Errorf("second line %s; want %s", lines[1], want)
	}
}

// TestLogLimiter: the first event is logged, the rest within the interval
// are held back and counted, the next after it is logged with that count.
func TestLogLimiter(t *testing.T) {
	clock := &stepClock{now: time.Date(2030, 1, 1, 0, 0, 0, 0, time.UTC)}
	l := newLogLimiter(time.Minute)
	l.setClock(clock.Now)
	type step struct {
		advance    time.Duration
		ok         bool
		suppressed uint64
	}
	steps := []step{
		{ok: true}, {ok: false}, {advance: 59 * time.Second, ok: false},
		{advance: time.Second, ok: true, suppressed: 2},
		{ok: false}, {advance: time.Hour, ok: true, suppressed: 1},
	}
	for i, s := range steps {
		clock.advance(s.advance)
		ok, n := l.allow()
		if ok != s.ok || n != s.suppressed {
			t.Errorf("event %d: allow = %v, %d; want %v, %d", i, ok, n, s.ok, s.suppressed)
		}
	}
}
