// Symmetry classes of grid simplices for the total DOS.

package mesh

import (
	"context"
	"fmt"
)

// SimplexClass is a set of grid simplices whose corners carry the same
// irreducible points: Key packs their slots (positions in
// IrreducibleGrid.Irr, sorted, 16 bits each). The total-DOS contribution
// of a simplex depends only on the frequencies at its corners, and a grid
// point's frequencies depend only on its irreducible representative, so
// every simplex of a class contributes exactly the same; the class is
// summed once with its count as weight. This is exact for the total DOS
// (not for site projections, whose weights are permuted between
// equivalent points).
type SimplexClass struct {
	Key   uint64
	Count float64
}

// ClassBytes is the memory of one SimplexClass.
const ClassBytes = 16

// Slot is corner c's slot of the class.
func (cl SimplexClass) Slot(c int) int { return int(cl.Key >> (16 * c) & 0xffff) }

// MaxClassSlots bounds the irreducible-point count for which slots pack
// into one uint64 key (16 bits each).
const MaxClassSlots = 1 << 16

// SimplexClasses returns the classes of the reduced grid's simplices, or
// nil when the grid was not reduced (ir nil) or has too many irreducible points to pack.
// They are kept in cache (nil: nowhere) per
// (reduced grid, cutting), so repeated requests on one lattice and grid
// find them once. Memory: 8 bytes of key per simplex and as much again
// for the radix sort, then 16 bytes per class. Building them is linear in
// the simplices (24 million on a 160³ grid); it polls ctx and returns
// ctx.Err() when ctx ends first, caching nothing.
func SimplexClasses(ctx context.Context, ir *IrreducibleGrid, set Simplices, cache *ReductionCache) ([]SimplexClass, error) {
	if ir == nil || len(ir.Irr) >= MaxClassSlots {
		return nil, nil
	}
	key := fmt.Sprint("classes:", reduceKey(ir.Rots, ir.Spec), set.Corners[:], set.Dim)
	if c, ok := cache.get(key); ok {
		return c.([]SimplexClass), nil
	}
	mesh := ir.Spec.Mesh
	ncell := mesh[0] * mesh[1] * mesh[2]
	dim := set.Dim
	keys := make([]uint64, 0, ncell*len(set.Corners))
	var idx [8]int
	for ci := 0; ci < ncell; ci++ {
		if ci%reducePoll == 0 && ctx.Err() != nil {
			return nil, ctx.Err()
		}
		ca, cb, cc := ci/(mesh[1]*mesh[2]), ci/mesh[2]%mesh[1], ci%mesh[2]
		for bits := 0; bits < 1<<dim; bits++ {
			idx[bits] = CornerIndex(mesh, ca, cb, cc, uint8(bits))
		}
		for _, corners := range set.Corners {
			var s [4]uint64
			for c := 0; c <= dim; c++ {
				s[c] = uint64(ir.Slot[idx[corners[c]]])
			}
			sortSlots(&s, dim+1)
			keys = append(keys, s[0]|s[1]<<16|s[2]<<32|s[3]<<48)
		}
	}
	if err := radixSort64(ctx, keys, 16*(dim+1)); err != nil {
		return nil, err
	}
	distinct := 0
	for i := range keys {
		if i == 0 || keys[i] != keys[i-1] {
			distinct++
		}
	}
	out := make([]SimplexClass, 0, distinct)
	for i := 0; i < len(keys); {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		j := i + 1
		for j < len(keys) && keys[j] == keys[i] {
			j++
		}
		out = append(out, SimplexClass{Key: keys[i], Count: float64(j - i)})
		i = j
	}
	cache.put(key, out)
	return out, nil
}

// radixSort64 sorts keys in place by their low `bits` bits (LSD radix
// sort, 16-bit digits): linear time, which matters for the millions of
// simplices of a 96³ grid. It polls ctx between passes (each a few tens
// of milliseconds at 24 million keys) and returns ctx.Err() if ctx ended.
func radixSort64(ctx context.Context, keys []uint64, bits int) error {
	if bits <= 0 || len(keys) < 2 {
		return nil
	}
	buf := make([]uint64, len(keys))
	const digit = 16
	var count [1 << digit]int
	src, dst := keys, buf
	for shift := 0; shift < bits; shift += digit {
		if err := ctx.Err(); err != nil {
			return err
		}
		clear(count[:])
		for _, k := range src {
			count[k>>shift&(1<<digit-1)]++
		}
		pos := 0
		for i, c := range count {
			count[i] = pos
			pos += c
		}
		for _, k := range src {
			d := k >> shift & (1<<digit - 1)
			dst[count[d]] = k
			count[d]++
		}
		src, dst = dst, src
	}
	if &src[0] != &keys[0] {
		copy(keys, src)
	}
	return nil
}

func sortSlots(s *[4]uint64, n int) {
	for i := 1; i < n; i++ {
		for j := i; j > 0 && s[j] < s[j-1]; j-- {
			s[j], s[j-1] = s[j-1], s[j]
		}
	}
}
