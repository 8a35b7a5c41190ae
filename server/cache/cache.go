package cache

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"runtime/debug"
	"sync"

	"golang.org/x/sync/singleflight"
)

// Key names one cached value. Kind is a small fixed family ("model",
// "grid", "dos", …) used as a metric label; Model is the model hash and
// Params the canonical parameters, so equal-meaning requests share a key.
type Key struct {
	Kind   string
	Model  string
	Params string
}

// maxRawParams is the longest Params kept verbatim in a key string; longer
// ones are replaced by their SHA-256 so keys stay short for any Backend.
const maxRawParams = 160

// String is the key as stored: "kind/model/params".
func (k Key) String() string {
	p := k.Params
	if len(p) > maxRawParams {
		sum := sha256.Sum256([]byte(p))
		p = "sha256:" + hex.EncodeToString(sum[:])
	}
	return k.Kind + "/" + k.Model + "/" + p
}

// Codec converts values of one kind to and from bytes for the Backend.
// Decode also returns the size to charge the value in the LRU; it gets the
// context of the read, so a costly decode (a model is compiled again from
// its source) stops when its caller leaves. The cache
// wraps the bytes in an envelope (envelope.go) holding the full key, the
// codec's Version and a checksum, and checks all three before Decode sees
// the payload.
type Codec struct {
	Encode func(v any) ([]byte, error)
	Decode func(ctx context.Context, b []byte) (v any, size int64, err error)
	// Version is the format of Encode's bytes; bump it when the format
	// changes, so replicas of different builds never read each other's
	// values (they are refused as ReasonVersion and recomputed).
	Version uint32
	// Verify, if set, checks a decoded value against the key it was read
	// under (for example that a model rebuilt from its source has the
	// model hash of the key); an error refuses the value as
	// ReasonKeyMismatch.
	Verify func(k Key, v any) error
}

// ComputeFunc computes a value and the number of bytes it holds (its
// charge in the LRU). ctx ends when every caller waiting for it has gone.
type ComputeFunc func(ctx context.Context) (v any, size int64, err error)

// Source says where Do found its value.
type Source int

// Sources of a value.
const (
	Computed Source = iota // computed by this call
	Memory                 // found in the in-process LRU
	Stored                 // found in the Backend
	Shared                 // computed (or fetched) by a concurrent identical call
)

func (s Source) String() string {
	switch s {
	case Memory:
		return "memory"
	case Stored:
		return "backend"
	case Shared:
		return "shared"
	default:
		return "computed"
	}
}

// ErrAbandoned marks a computation stopped because every caller waiting
// for it left (cancelled or past its deadline).
var ErrAbandoned = errors.New("cache: computation abandoned by every caller")

// PanicError is a panic recovered from a ComputeFunc, with its stack.
// Flights run on their own goroutine, where a panic could not be recovered
// by the caller, so Do turns it into this error.
type PanicError struct {
	Value any
	Stack []byte
}

func (e *PanicError) Error() string { return fmt.Sprintf("cache: compute panicked: %v", e.Value) }

// Options configures a Cache. The zero value is a cache that stores
// nothing in memory and has no Backend (flights still deduplicate).
type Options struct {
	// MaxBytes bounds the LRU; ≤ 0 disables in-process storage.
	MaxBytes int64
	// Backend is the optional second level; nil means none.
	Backend Backend
	// OnBackendError, if set, is called for every Backend failure (op is
	// "get" or "set"); the cache then carries on without it.
	OnBackendError func(op string, key Key, err error)
	// OnIntegrityFailure, if set, is called for every entry refused on
	// read (a value under the wrong key, a failed checksum, bytes that do
	// not decode, another format version). The entry is never served: the
	// read is a miss and the value is computed again.
	OnIntegrityFailure func(key Key, err *IntegrityError)
}

// KindStats are the counters and sizes of one kind of key.
type KindStats struct {
	Hits              uint64 // served from memory
	BackendHits       uint64 // served from the Backend
	Misses            uint64 // found in neither level
	Joined            uint64 // waited for a concurrent identical computation
	Evictions         uint64 // dropped from memory to respect MaxBytes
	Refused           uint64 // larger than MaxBytes on its own, not stored
	BackendErrors     uint64 // Backend get/set failures
	IntegrityFailures uint64 // entries refused on read by an integrity check (either tier)
	Bytes             int64  // bytes held in memory
	Entries           int64  // entries held in memory
}

// Cache is a byte-bounded LRU with a flight group and an optional Backend.
// It is safe for concurrent use.
type Cache struct {
	opt   Options
	group singleflight.Group

	mu      sync.Mutex         // protects everything below
	lru     *lru               // nil when MaxBytes ≤ 0
	flights map[string]*flight // interest in running computations, by key
	stats   map[string]*KindStats
}

// flight is the shared state of one running computation: its context is
// cancelled when the last interested caller leaves.
type flight struct {
	kind   string
	ctx    context.Context
	cancel context.CancelFunc
	refs   int
}

// New returns a Cache.
func New(opt Options) *Cache {
	c := &Cache{opt: opt, flights: map[string]*flight{}, stats: map[string]*KindStats{}}
	if opt.MaxBytes > 0 {
		c.lru = newLRU(opt.MaxBytes, func(e *entry) {
			st := c.kind(e.kind)
			st.Evictions++
			st.Bytes -= e.size
			st.Entries--
		})
	}
	return c
}

// kind returns the stats of kind k, creating them; c.mu must be held.
func (c *Cache) kind(k string) *KindStats {
	st := c.stats[k]
	if st == nil {
		st = &KindStats{}
		c.stats[k] = st
	}
	return st
}

// Stats returns a copy of the per-kind statistics.
func (c *Cache) Stats() map[string]KindStats {
	c.mu.Lock()
	defer c.mu.Unlock()
	out := make(map[string]KindStats, len(c.stats))
	for k, st := range c.stats {
		out[k] = *st
	}
	return out
}

// MaxBytes is the configured memory bound (≤ 0: memory disabled).
func (c *Cache) MaxBytes() int64 { return c.opt.MaxBytes }

// Get looks key up in memory only, counting a hit but not a miss.
// An entry filed under k's string but holding another key is refused
// (ReasonKeyMismatch), dropped, and reported as a miss.
func (c *Cache) Get(k Key) (any, bool) {
	c.mu.Lock()
	v, ok, ierr := c.getLocked(k)
	c.mu.Unlock()
	if ierr != nil {
		c.refuse(k, ierr)
	}
	return v, ok
}

func (c *Cache) getLocked(k Key) (any, bool, *IntegrityError) {
	if c.lru == nil {
		return nil, false, nil
	}
	e, ok := c.lru.get(k.String())
	if !ok {
		return nil, false, nil
	}
	if e.full != k {
		c.dropLocked(e)
		return nil, false, &IntegrityError{Tier: TierMemory, Reason: ReasonKeyMismatch,
			Err: fmt.Errorf("entry is for %s, asked for %s", shortKey(e.full), shortKey(k))}
	}
	c.kind(k.Kind).Hits++
	return e.value, true, nil
}

// dropLocked removes e from memory; c.mu must be held.
func (c *Cache) dropLocked(e *entry) {
	st := c.kind(e.kind)
	st.Bytes -= e.size
	st.Entries--
	c.lru.remove(e.key)
}

// refuse counts and reports an entry refused by an integrity check.
func (c *Cache) refuse(k Key, err *IntegrityError) {
	c.count(k, func(st *KindStats) { st.IntegrityFailures++ })
	if c.opt.OnIntegrityFailure != nil {
		c.opt.OnIntegrityFailure(k, err)
	}
}

// Lookup finds key in memory, then in the Backend (decoding with codec and
// keeping the value in memory). It counts a miss when neither has it.
func (c *Cache) Lookup(ctx context.Context, k Key, codec *Codec) (any, Source, bool) {
	if v, ok := c.Get(k); ok {
		return v, Memory, true
	}
	if v, ok := c.fromBackend(ctx, k, codec); ok {
		return v, Stored, true
	}
	c.count(k, func(st *KindStats) { st.Misses++ })
	return nil, Computed, false
}

// Put stores v (charged size bytes) in memory and, when codec is not nil,
// in the Backend.
func (c *Cache) Put(ctx context.Context, k Key, v any, size int64, codec *Codec) {
	c.putMemory(k, v, size)
	c.toBackend(ctx, k, v, codec)
}

func (c *Cache) putMemory(k Key, v any, size int64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.lru == nil {
		return
	}
	key := k.String()
	st := c.kind(k.Kind)
	if old, ok := c.lru.items[key]; ok {
		oe := old.Value.(*entry)
		ost := c.kind(oe.kind)
		ost.Bytes -= oe.size
		ost.Entries--
	}
	if !c.lru.add(&entry{key: key, full: k, kind: k.Kind, value: v, size: size}) {
		st.Refused++
		return
	}
	st.Bytes += size
	st.Entries++
}

func (c *Cache) count(k Key, f func(*KindStats)) {
	c.mu.Lock()
	f(c.kind(k.Kind))
	c.mu.Unlock()
}

func (c *Cache) backendError(op string, k Key, err error) {
	c.count(k, func(st *KindStats) { st.BackendErrors++ })
	if c.opt.OnBackendError != nil {
		c.opt.OnBackendError(op, k, err)
	}
}

// backendKey is k's key in the Backend. It names the envelope version, so
// replicas of a build with another envelope format use other keys.
func backendKey(k Key) string { return fmt.Sprintf("e%d/%s", envelopeVersion, k.String()) }

// fromBackend fetches k, checks its envelope and decodes it, keeping it in
// memory on success. A refused entry is a miss.
func (c *Cache) fromBackend(ctx context.Context, k Key, codec *Codec) (any, bool) {
	if c.opt.Backend == nil || codec == nil {
		return nil, false
	}
	b, ok, err := c.opt.Backend.Get(ctx, backendKey(k))
	if err != nil {
		c.backendError("get", k, err)
		return nil, false
	}
	if !ok {
		return nil, false
	}
	v, size, ierr := decodeEntry(ctx, k, codec, b)
	if ierr != nil && ctx.Err() != nil {
		return nil, false // the reader left: a miss, not a bad entry
	}
	if ierr != nil {
		c.refuse(k, ierr)
		return nil, false
	}
	c.count(k, func(st *KindStats) { st.BackendHits++ })
	c.putMemory(k, v, size)
	return v, true
}

// decodeEntry opens b's envelope for k and decodes and verifies the value.
func decodeEntry(ctx context.Context, k Key, codec *Codec, b []byte) (any, int64, *IntegrityError) {
	payload, err := openEnvelope(k, codec.Version, b)
	if err != nil {
		return nil, 0, err.(*IntegrityError)
	}
	v, size, err := codec.Decode(ctx, payload)
	if err != nil {
		return nil, 0, sharedFailure(ReasonDecode, "payload does not decode: %w", err)
	}
	if codec.Verify != nil {
		if err := codec.Verify(k, v); err != nil {
			return nil, 0, sharedFailure(ReasonKeyMismatch, "value does not match its key: %w", err)
		}
	}
	return v, size, nil
}

func (c *Cache) toBackend(ctx context.Context, k Key, v any, codec *Codec) {
	if c.opt.Backend == nil || codec == nil {
		return
	}
	b, err := codec.Encode(v)
	if err == nil {
		err = c.opt.Backend.Set(ctx, backendKey(k), sealEnvelope(k, codec.Version, b))
	}
	if err != nil {
		c.backendError("set", k, err)
	}
}

// Do returns the value under k: from memory, else from the Backend, else
// by calling compute — once for all concurrent callers of the same key —
// and storing the result in both levels. Errors are not cached.
//
// compute runs with a context that ends only when every caller waiting for
// it has gone, so one impatient caller does not cancel the work of others;
// when it ends that way the error wraps ErrAbandoned. A caller whose own
// ctx ends gets ctx.Err() at once.
func (c *Cache) Do(ctx context.Context, k Key, codec *Codec, compute ComputeFunc) (any, Source, error) {
	if v, ok := c.Get(k); ok {
		return v, Memory, nil
	}
	key := k.String()
	for {
		if err := ctx.Err(); err != nil {
			return nil, Computed, err
		}
		f := c.join(ctx, k.Kind, key)
		me := new(caller)
		ch := c.group.DoChan(key, func() (any, error) {
			return c.fly(f, me, k, codec, compute)
		})
		select {
		case <-ctx.Done():
			c.leave(key, f)
			return nil, Computed, ctx.Err()
		case r := <-ch:
			c.leave(key, f)
			if r.Err != nil {
				if errors.Is(r.Err, ErrAbandoned) && ctx.Err() == nil {
					continue // joined a flight others gave up on: start afresh
				}
				return nil, Computed, r.Err
			}
			res := r.Val.(flightResult)
			src := res.src
			if r.Shared && src == Computed {
				// Only one of the callers did the work; the others
				// cannot tell which, so all but that one report Shared.
				if res.owner != me {
					src = Shared
					c.count(k, func(st *KindStats) { st.Joined++ })
				}
			}
			return res.v, src, nil
		}
	}
}

// flightResult is what a flight hands to every waiting caller.
type flightResult struct {
	v     any
	src   Source
	owner *caller // the caller whose closure ran
}

// caller identifies one Do call, to tell the caller that computed from
// those that joined it.
type caller struct{ _ byte }

// join registers ctx's caller as interested in key's computation.
func (c *Cache) join(ctx context.Context, kind, key string) *flight {
	c.mu.Lock()
	defer c.mu.Unlock()
	f := c.flights[key]
	if f == nil {
		fctx, cancel := context.WithCancel(context.WithoutCancel(ctx))
		f = &flight{kind: kind, ctx: fctx, cancel: cancel}
		c.flights[key] = f
	}
	f.refs++
	return f
}

// leave drops one interest; the last one out cancels the computation.
func (c *Cache) leave(key string, f *flight) {
	c.mu.Lock()
	defer c.mu.Unlock()
	f.refs--
	if f.refs == 0 {
		f.cancel()
		if c.flights[key] == f {
			delete(c.flights, key)
		}
	}
}

// fly runs on the flight's own goroutine: memory again (a flight that just
// ended may have stored it), the Backend, then compute.
func (c *Cache) fly(f *flight, me *caller, k Key, codec *Codec, compute ComputeFunc) (res any, err error) {
	defer func() {
		if p := recover(); p != nil {
			err = &PanicError{Value: p, Stack: debug.Stack()}
		}
	}()
	if v, ok := c.Get(k); ok {
		return flightResult{v: v, src: Memory, owner: me}, nil
	}
	if v, ok := c.fromBackend(f.ctx, k, codec); ok {
		return flightResult{v: v, src: Stored, owner: me}, nil
	}
	c.count(k, func(st *KindStats) { st.Misses++ })
	v, size, err := compute(f.ctx)
	if err != nil {
		if f.ctx.Err() != nil {
			return nil, fmt.Errorf("%w: %w", ErrAbandoned, err)
		}
		return nil, err
	}
	c.Put(f.ctx, k, v, size, codec)
	return flightResult{v: v, src: Computed, owner: me}, nil
}

// Remove drops key from memory (not from the Backend).
func (c *Cache) Remove(k Key) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.lru == nil {
		return
	}
	if el, ok := c.lru.items[k.String()]; ok {
		c.dropLocked(el.Value.(*entry))
	}
}

// Contains reports whether key is in memory, without counting a hit or
// refreshing its recency.
func (c *Cache) Contains(k Key) bool {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.lru == nil {
		return false
	}
	el, ok := c.lru.items[k.String()]
	return ok && el.Value.(*entry).full == k
}

// Waiting is the number of callers waiting for running computations of
// kind (all kinds when kind is empty).
func (c *Cache) Waiting(kind string) int {
	c.mu.Lock()
	defer c.mu.Unlock()
	n := 0
	for _, f := range c.flights {
		if kind == "" || f.kind == kind {
			n += f.refs
		}
	}
	return n
}
