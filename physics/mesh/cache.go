// The reduction cache: reductions and simplex classes kept for reuse.

package mesh

// ReductionCache keeps what is worth reusing between grid computations of
// models on one lattice: the symmetry reductions of grids (Reduce) and
// the simplex classes of the tetrahedron method built on them. The engine
// itself keeps no process-global cache; a caller that wants reuse owns a
// ReductionCache, bounds it and charges it to its own memory accounting,
// and passes it in GridOptions.Cache (the GridModes it returns carry it on
// to ComputeDOS).
//
// A nil *ReductionCache, and the zero value, cache nothing. Safe for
// concurrent use.
type ReductionCache struct {
	c *lru[any] // nil: no caching
}

// NewReductionCache returns a cache holding at most maxBytes of tables
// (as counted by IrreducibleGrid.Bytes and 16 bytes per simplex class);
// maxBytes ≤ 0 gives a cache that keeps nothing.
func NewReductionCache(maxBytes int64) *ReductionCache {
	if maxBytes <= 0 {
		return &ReductionCache{}
	}
	return &ReductionCache{c: newSizedLRU[any](1<<20, int(maxBytes), cachedBytes)}
}

// cachedBytes is the charge of a cached value.
func cachedBytes(v any) int {
	switch x := v.(type) {
	case *IrreducibleGrid:
		return int(x.Bytes())
	case []SimplexClass:
		return ClassBytes * len(x)
	}
	return 0
}

// Bytes is the memory the cache holds now.
func (r *ReductionCache) Bytes() int64 {
	if r == nil || r.c == nil {
		return 0
	}
	r.c.mu.Lock()
	defer r.c.mu.Unlock()
	return int64(r.c.bytes)
}

// MaxBytes is the cache's bound (0: caches nothing).
func (r *ReductionCache) MaxBytes() int64 {
	if r == nil || r.c == nil {
		return 0
	}
	return int64(r.c.maxBytes)
}

func (r *ReductionCache) get(key string) (any, bool) {
	if r == nil || r.c == nil {
		return nil, false
	}
	return r.c.get(key)
}

func (r *ReductionCache) put(key string, v any) {
	if r == nil || r.c == nil {
		return
	}
	r.c.put(key, v)
}

// Lookup returns the cached reduction of spec under rots, if any.
func (r *ReductionCache) Lookup(rots [][3][3]int, spec GridSpec) (*IrreducibleGrid, bool) {
	if v, ok := r.get(irrKey(rots, spec)); ok {
		return v.(*IrreducibleGrid), true
	}
	return nil, false
}

// CheapReduction is the largest grid (points) a caller may reduce on the
// spot to estimate work (7 bytes a point, a few milliseconds).
const CheapReduction = 1 << 16
