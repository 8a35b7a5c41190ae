package cache

import (
	"context"
	"errors"
	"runtime"
	"strconv"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"go.uber.org/goleak"
)

func TestMain(m *testing.M) { goleak.VerifyTestMain(m) }

func testContext(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	t.Cleanup(cancel)
	return ctx
}

// mapBackend is a minimal in-process Backend for these unit tests; the
// server tests use a real redis-server.
type mapBackend struct {
	mu   sync.Mutex
	m    map[string][]byte
	fail error // returned by every call when set
	gets int
}

func (b *mapBackend) Get(_ context.Context, key string) ([]byte, bool, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.gets++
	if b.fail != nil {
		return nil, false, b.fail
	}
	v, ok := b.m[key]
	return v, ok, nil
}

func (b *mapBackend) Set(_ context.Context, key string, value []byte) error {
	b.mu.Lock()
	defer b.mu.Unlock()
	if b.fail != nil {
		return b.fail
	}
	if b.m == nil {
		b.m = map[string][]byte{}
	}
	b.m[key] = append([]byte(nil), value...)
	return nil
}

var stringCodec = &Codec{
	Encode: func(v any) ([]byte, error) { return []byte(v.(string)), nil },
	Decode: func(_ context.Context, b []byte) (any, int64, error) {
		if len(b) == 0 {
			return nil, 0, errors.New("empty")
		}
		return string(b), int64(len(b)), nil
	},
}

func key(i int) Key { return Key{Kind: "t", Model: "m", Params: strconv.Itoa(i)} }

func TestLRUBound(t *testing.T) {
	tests := []struct {
		name       string
		maxBytes   int64
		sizes      []int64 // added in order under keys 0, 1, …
		touch      []int   // keys read after adding, in order
		add        int64   // one more entry (key 99) of this size
		wantKeys   []int   // keys still held (besides 99 when stored)
		wantEvict  uint64
		wantRefuse uint64
	}{
		{name: "fits", maxBytes: 100, sizes: []int64{10, 20, 30}, add: 40, wantKeys: []int{0, 1, 2}},
		{name: "evicts oldest", maxBytes: 100, sizes: []int64{40, 40}, add: 30, wantKeys: []int{1}, wantEvict: 1},
		{name: "evicts least recently used", maxBytes: 100, sizes: []int64{40, 40}, touch: []int{0}, add: 30, wantKeys: []int{0}, wantEvict: 1},
		{name: "evicts several", maxBytes: 100, sizes: []int64{30, 30, 30}, add: 90, wantKeys: nil, wantEvict: 3},
		{name: "refuses oversized", maxBytes: 100, sizes: []int64{30}, add: 101, wantKeys: []int{0}, wantRefuse: 1},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c := New(Options{MaxBytes: tt.maxBytes})
			ctx := testContext(t)
			for i, s := range tt.sizes {
				c.Put(ctx, key(i), i, s, nil)
			}
			for _, i := range tt.touch {
				if _, ok := c.Get(key(i)); !ok {
					t.Fatalf("key %d missing before the last add", i)
				}
			}
			c.Put(ctx, key(99), 99, tt.add, nil)
			var held []int
			for i := range tt.sizes {
				c.mu.Lock()
				_, ok := c.lru.items[key(i).String()]
				c.mu.Unlock()
				if ok {
					held = append(held, i)
				}
			}
			if len(held) != len(tt.wantKeys) {
				t.Fatalf("held keys %v; want %v", held, tt.wantKeys)
			}
			for j := range held {
				if held[j] != tt.wantKeys[j] {
					t.Fatalf("held keys %v; want %v", held, tt.wantKeys)
				}
			}
			st := c.Stats()["t"]
			if st.Evictions != tt.wantEvict || st.Refused != tt.wantRefuse {
				t.Errorf("got %d evictions, %d refused; want %d, %d", st.Evictions, st.Refused, tt.wantEvict, tt.wantRefuse)
			}
			if st.Bytes > tt.maxBytes {
				t.Errorf("holds %d bytes; bound %d", st.Bytes, tt.maxBytes)
			}
			c.mu.Lock()
			if st.Bytes != c.lru.bytes || st.Entries != int64(c.lru.len()) {
				t.Errorf("stats say %d bytes in %d entries; LRU holds %d in %d", st.Bytes, st.Entries, c.lru.bytes, c.lru.len())
			}
			c.mu.Unlock()
		})
	}
}

func TestReplaceKeepsAccounting(t *testing.T) {
	c := New(Options{MaxBytes: 100})
	ctx := testContext(t)
	c.Put(ctx, key(1), "a", 60, nil)
	c.Put(ctx, key(1), "b", 30, nil)
	st := c.Stats()["t"]
	if st.Bytes != 30 || st.Entries != 1 || st.Evictions != 0 {
		t.Errorf("after replacing: %d bytes, %d entries, %d evictions; want 30, 1, 0", st.Bytes, st.Entries, st.Evictions)
	}
	if v, _ := c.Get(key(1)); v != "b" {
		t.Errorf("got %v; want the replacement b", v)
	}
}

func TestDisabledMemory(t *testing.T) {
	c := New(Options{MaxBytes: 0})
	ctx := testContext(t)
	var calls atomic.Int32
	for range 3 {
		v, src, err := c.Do(ctx, key(1), nil, func(context.Context) (any, int64, error) {
			calls.Add(1)
			return "x", 1, nil
		})
		if err != nil || v != "x" || src != Computed {
			t.Fatalf("got %v, %v, %v; want x, computed, nil", v, src, err)
		}
	}
	if calls.Load() != 3 {
		t.Errorf("computed %d times; want 3 with memory disabled", calls.Load())
	}
}

// waitRefs spins until key has n interested callers.
func waitRefs(t *testing.T, c *Cache, k Key, n int) {
	t.Helper()
	ctx := testContext(t)
	for {
		c.mu.Lock()
		f := c.flights[k.String()]
		got := 0
		if f != nil {
			got = f.refs
		}
		c.mu.Unlock()
		if got == n {
			return
		}
		if ctx.Err() != nil {
			t.Fatalf("%d callers joined; want %d", got, n)
		}
		runtime.Gosched()
	}
}

func TestConcurrentIdenticalComputeOnce(t *testing.T) {
	c := New(Options{MaxBytes: 1 << 20})
	ctx := testContext(t)
	release := make(chan struct{})
	var calls atomic.Int32
	compute := func(context.Context) (any, int64, error) {
		calls.Add(1)
		<-release
		return "v", 1, nil
	}
	const n = 20
	srcs := make([]Source, n)
	var wg sync.WaitGroup
	for i := range n {
		wg.Go(func() {
			v, src, err := c.Do(ctx, key(7), nil, compute)
			if err != nil || v != "v" {
				t.Errorf("caller %d: got %v, %v", i, v, err)
			}
			srcs[i] = src
		})
	}
	waitRefs(t, c, key(7), n)
	close(release)
	wg.Wait()
	if calls.Load() != 1 {
		t.Errorf("computed %d times; want 1", calls.Load())
	}
	count := map[Source]int{}
	for _, s := range srcs {
		count[s]++
	}
	if count[Computed] != 1 || count[Shared] != n-1 {
		t.Errorf("sources %v; want 1 computed, %d shared", count, n-1)
	}
	if v, src, _ := c.Do(ctx, key(7), nil, compute); v != "v" || src != Memory {
		t.Errorf("afterwards got %v from %v; want v from memory", v, src)
	}
}

func TestAbandonedWhenEveryCallerLeaves(t *testing.T) {
	c := New(Options{MaxBytes: 1 << 20})
	stopped := make(chan error, 1)
	compute := func(ctx context.Context) (any, int64, error) {
		<-ctx.Done()
		stopped <- ctx.Err()
		return nil, 0, ctx.Err()
	}
	var wg sync.WaitGroup
	cancels := make([]context.CancelFunc, 3)
	for i := range cancels {
		ctx, cancel := context.WithCancel(testContext(t))
		cancels[i] = cancel
		wg.Go(func() {
			if _, _, err := c.Do(ctx, key(1), nil, compute); !errors.Is(err, context.Canceled) {
				t.Errorf("caller %d: got %v; want context.Canceled", i, err)
			}
		})
	}
	waitRefs(t, c, key(1), 3)
	cancels[0]()
	cancels[1]()
	waitRefs(t, c, key(1), 1)
	select {
	case err := <-stopped:
		t.Fatalf("computation stopped (%v) while a caller still waited", err)
	default:
	}
	cancels[2]()
	if err := <-stopped; !errors.Is(err, context.Canceled) {
		t.Errorf("computation saw %v; want context.Canceled", err)
	}
	wg.Wait()
	c.mu.Lock()
	left := len(c.flights)
	c.mu.Unlock()
	if left != 0 {
		t.Errorf("%d flight records left; want 0", left)
	}
}

func TestErrorsNotCached(t *testing.T) {
	c := New(Options{MaxBytes: 1 << 20})
	ctx := testContext(t)
	boom := errors.New("boom")
	if _, _, err := c.Do(ctx, key(1), nil, func(context.Context) (any, int64, error) { return nil, 0, boom }); !errors.Is(err, boom) {
		t.Fatalf("got %v; want boom", err)
	}
	v, src, err := c.Do(ctx, key(1), nil, func(context.Context) (any, int64, error) { return "ok", 2, nil })
	if err != nil || v != "ok" || src != Computed {
		t.Errorf("retry got %v, %v, %v; want ok, computed", v, src, err)
	}
}

func TestPanicBecomesError(t *testing.T) {
	c := New(Options{MaxBytes: 1 << 20})
	_, _, err := c.Do(testContext(t), key(1), nil, func(context.Context) (any, int64, error) { panic("kaput") })
	var pe *PanicError
	if !errors.As(err, &pe) || pe.Value != "kaput" || len(pe.Stack) == 0 {
		t.Errorf("got %v; want a PanicError with value kaput and a stack", err)
	}
}

func TestBackendLevels(t *testing.T) {
	ctx := testContext(t)
	be := &mapBackend{}
	a := New(Options{MaxBytes: 1 << 20, Backend: be})
	compute := func(context.Context) (any, int64, error) { return "payload", 7, nil }
	if _, src, err := a.Do(ctx, key(1), stringCodec, compute); err != nil || src != Computed {
		t.Fatalf("first: %v, %v", src, err)
	}
	// A second replica with an empty memory finds it in the Backend.
	b := New(Options{MaxBytes: 1 << 20, Backend: be})
	v, src, err := b.Do(ctx, key(1), stringCodec, func(context.Context) (any, int64, error) {
		t.Error("computed although the backend holds the value")
		return nil, 0, nil
	})
	if err != nil || v != "payload" || src != Stored {
		t.Errorf("replica got %v from %v (%v); want payload from backend", v, src, err)
	}
	if _, src, _ := b.Do(ctx, key(1), stringCodec, compute); src != Memory {
		t.Errorf("replica's second read from %v; want memory", src)
	}
	if st := b.Stats()["t"]; st.BackendHits != 1 || st.Hits != 1 || st.Misses != 0 {
		t.Errorf("replica stats %+v; want 1 backend hit, 1 memory hit, 0 misses", st)
	}
	// Lookup without compute, and a nil codec keeps a kind out of the Backend.
	if _, src, ok := New(Options{Backend: be}).Lookup(ctx, key(1), stringCodec); !ok || src != Stored {
		t.Errorf("Lookup: %v, %v; want found in backend", src, ok)
	}
	if _, _, ok := New(Options{Backend: be}).Lookup(ctx, key(1), nil); ok {
		t.Error("Lookup with a nil codec consulted the backend")
	}
}

func TestBackendErrorsNeverFail(t *testing.T) {
	tests := []struct {
		name  string
		be    *mapBackend
		value string // stored beforehand under the key
		ops   []string
	}{
		{name: "get and set fail", be: &mapBackend{fail: errors.New("connection refused")}, ops: []string{"get", "set"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var ops []string
			c := New(Options{MaxBytes: 1 << 20, Backend: tt.be, OnBackendError: func(op string, k Key, err error) {
				ops = append(ops, op)
			}})
			v, src, err := c.Do(testContext(t), key(1), stringCodec, func(context.Context) (any, int64, error) { return "fresh", 5, nil })
			if err != nil || v != "fresh" || src != Computed {
				t.Fatalf("got %v from %v (%v); want fresh, computed", v, src, err)
			}
			if len(ops) != len(tt.ops) {
				t.Fatalf("backend errors %v; want %v", ops, tt.ops)
			}
			for i := range ops {
				if ops[i] != tt.ops[i] {
					t.Errorf("backend errors %v; want %v", ops, tt.ops)
				}
			}
			if st := c.Stats()["t"]; st.BackendErrors != uint64(len(tt.ops)) {
				t.Errorf("counted %d backend errors; want %d", st.BackendErrors, len(tt.ops))
			}
		})
	}
}

func TestKeyString(t *testing.T) {
	long := make([]byte, 400)
	for i := range long {
		long[i] = 'a'
	}
	tests := []struct {
		name string
		k    Key
		want string
	}{
		{name: "short", k: Key{Kind: "dos", Model: "abc", Params: "method=tetrahedron"}, want: "dos/abc/method=tetrahedron"},
		{name: "long params hashed", k: Key{Kind: "dos", Model: "abc", Params: string(long)}, want: "dos/abc/sha256:"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := tt.k.String()
			if len(got) < len(tt.want) || got[:len(tt.want)] != tt.want {
				t.Errorf("got %q; want prefix %q", got, tt.want)
			}
			if len(got) > 64+len("dos/abc/sha256:") {
				t.Errorf("key of %d bytes; want it bounded", len(got))
			}
		})
	}
}
