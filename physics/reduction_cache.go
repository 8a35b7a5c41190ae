package physics

import "context"

// ReductionCache keeps what is worth reusing between grid computations of
// models on one lattice: the symmetry reductions of grids (ReduceGrid) and
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
	case []simplexClass:
		return classBytes * len(x)
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

// CheapReduction is the largest grid (points) IrreducibleCount reduces
// on the spot when the cache does not know it: 7 bytes a point, a few
// milliseconds.
const CheapReduction = 1 << 16

// CheapSymmetrySites is the largest model (sites) whose symmetry
// IrreducibleCount finds on the spot when it is not yet known: the search
// grows with sites² per candidate operation, milliseconds up to here.
const CheapSymmetrySites = 16

// IrreducibleCount returns the number of irreducible points of spec for m
// and true when it is known cheaply: the reduction is in the cache, or the
// grid is small enough (CheapReduction) to reduce now, the model's symmetry
// being known or cheap to find (CheapSymmetrySites) (the reduction is
// then kept in the cache for the computation that follows). Otherwise it
// returns IrreducibleUpperBound and false. Admission control uses it to
// estimate a grid computation before any large work.
func (r *ReductionCache) IrreducibleCount(m *Model, spec GridSpec) (int, bool) {
	spec, err := spec.normalize(m.dim, "mesh")
	if err != nil {
		return 0, false
	}
	bound := IrreducibleUpperBound(spec.Count(), m.dim)
	if _, known := m.sym.peek(); !known && m.nsites > CheapSymmetrySites {
		return bound, false // finding the symmetry is work to admit first
	}
	// Known, or a search of milliseconds (CheapSymmetrySites): not
	// cancellable from here, and not needed to be.
	ops, err := m.gridOps(context.Background(), spec)
	if err != nil {
		return bound, false
	}
	if v, ok := r.get(irrKey(ops, spec)); ok {
		return len(v.(*IrreducibleGrid).Irr), true
	}
	if spec.Count() <= CheapReduction {
		ir, err := reduce(context.Background(), ops, spec)
		if err != nil {
			return bound, false
		}
		r.put(irrKey(ops, spec), ir)
		return len(ir.Irr), true
	}
	return bound, false
}
