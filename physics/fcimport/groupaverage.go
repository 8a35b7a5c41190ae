package fcimport

import (
	"context"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics/lattice"
)

// The average of a folded set over the space group.
//
// An operation g takes the pair (site s, cell 0; site t, cell R) to
// (π(s), S_s; π(t), rot·R + S_t), i.e. to the block key
// g·(s, t, R) = (π(s), π(t), rot·R + S_t − S_s) (translated back to cell
// 0), and a set invariant under g has Φ(g·k) = C Φ(k) Cᵀ. The group
// average
//
//	Φ̄(k) = (1/|G|) Σ_g C_g Φ(g⁻¹·k) C_gᵀ
//
// (computed forwards: every block pushed to every image) is a projection
// onto the invariant sets when the operations form a group, since
// g ↦ (k ↦ g·k, Φ ↦ C_g Φ C_gᵀ) is then a representation. It keeps the
// other two properties exactly: g maps the reverse of a key to the reverse
// of its image, so index-permutation symmetry is kept, and for a fixed s
// the map (t, R) → (π(t), rot·R + S_t − S_s) is a bijection of the atoms,
// so every row sum of Φ̄ is an average of C E Cᵀ of row sums E: zero when
// the sum rule held. Imposing both first and averaging last therefore
// leaves all three to rounding. With C orthogonal (an exactly symmetric
// lattice, which Symmetrize makes) both corrections are orthogonal
// projections (in the Frobenius norm over the set's blocks) commuting
// with the group, and the result is the least-squares nearest set that has
// all three properties on the support closed under the group.
//
// Factorised: the pure translations T (rotation the identity) are a normal
// subgroup, the kernel of g ↦ rotation, and every operation is r·t for one
// operation r per rotation and one t of T. So Σ_g ρ(g) = Σ_r ρ(r) Σ_t ρ(t):
// the average over G is the average over T followed by the average over
// the representatives r, |T| + |R| passes over the blocks instead of
// |T|·|R| (112 instead of 3 072 for a 128-site supercell-like cell of an
// fcc crystal); the support is closed under G by closing it under T and
// then under the r; and a set is invariant under every operation exactly
// when it is under T and the r, which is what invariance measures.

// image returns g·k.
func (op *symOp) image(k key, d int) key {
	var r [3]int
	for a := 0; a < d; a++ {
		for b := 0; b < d; b++ {
			r[a] += op.rot[a][b] * k.r[b]
		}
		r[a] += op.shift[k.t][a] - op.shift[k.s][a]
	}
	return key{op.perm[k.s], op.perm[k.t], r}
}

// rotate returns C Φ Cᵀ.
func rotate(c *[3][3]float64, phi *[9]float64) [9]float64 {
	var tmp, out [9]float64
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			var s float64
			for e := 0; e < 3; e++ {
				s += c[a][e] * phi[3*e+b]
			}
			tmp[3*a+b] = s
		}
	}
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			var s float64
			for e := 0; e < 3; e++ {
				s += tmp[3*a+e] * c[b][e]
			}
			out[3*a+b] = s
		}
	}
	return out
}

// factorGroup splits a space group into its pure translations (rotation
// the identity) and one operation per rotation, in the order found.
func factorGroup(ops []symOp) (trans, reps []symOp) {
	seen := map[[3][3]int]bool{}
	for _, op := range ops {
		if op.rot == lattice.Identity() {
			trans = append(trans, op)
		}
		if !seen[op.rot] {
			seen[op.rot] = true
			reps = append(reps, op)
		}
	}
	return trans, reps
}

// closeUnderGroup adds zero blocks at the images of every key, so that
// the support of fc is closed under the group ops (closed under its
// translations, then under one operation per rotation). It returns
// ctx.Err() if ctx ends first.
func closeUnderGroup(ctx context.Context, fc map[key][9]float64, ops []symOp, d int) error {
	trans, reps := factorGroup(ops)
	for _, part := range [][]symOp{trans, reps} {
		if err := closeUnder(ctx, fc, part, d); err != nil {
			return err
		}
	}
	return nil
}

// closeUnder adds zero blocks at the images of every key under ops.
func closeUnder(ctx context.Context, fc map[key][9]float64, ops []symOp, d int) error {
	for _, k := range sortedKeys(fc) {
		if err := ctx.Err(); err != nil {
			return err
		}
		for x := range ops {
			ik := ops[x].image(k, d)
			if _, ok := fc[ik]; !ok {
				fc[ik] = [9]float64{}
			}
		}
	}
	return nil
}

// The invariance of a set is max |C_g Φ(k) C_gᵀ − Φ(g·k)| over the
// group's translations and one operation per rotation (every operation is
// a product of one of each, so it is 0 exactly when the set is invariant
// under all of them) and the blocks k (indexedSet.invariance).

// indexedSet is a folded set whose support is closed under a group, its
// blocks in key order with, for each of the group's generating operations
// (its translations, then one operation per rotation; factorGroup), the
// index of every block's image: the passes of the symmetrisation then
// read and write arrays instead of looking every image up in the map
// (about 330 ns a block and operation with the map).
type indexedSet struct {
	keys   []key
	vals   [][9]float64
	gens   []symOp
	ntrans int
	img    [][]int32 // img[x][i]: index of gens[x]·keys[i]
}

// newIndexedSet indexes fc, whose support must be closed under ops
// (closeUnderGroup). It returns ctx.Err() if ctx ends first.
func newIndexedSet(ctx context.Context, fc map[key][9]float64, ops []symOp, d int) (*indexedSet, error) {
	trans, reps := factorGroup(ops)
	s := &indexedSet{keys: sortedKeys(fc), gens: append(append([]symOp(nil), trans...), reps...), ntrans: len(trans)}
	index := make(map[key]int32, len(s.keys))
	for i, k := range s.keys {
		index[k] = int32(i)
	}
	s.vals = make([][9]float64, len(s.keys))
	s.img = make([][]int32, len(s.gens))
	for x := range s.gens {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		row := make([]int32, len(s.keys))
		for i, k := range s.keys {
			j, ok := index[s.gens[x].image(k, d)]
			if !ok {
				return nil, fmt.Errorf("fcimport: internal: the support is not closed under the group (block %v)", k)
			}
			row[i] = j
		}
		s.img[x] = row
	}
	return s, nil
}

// load reads the blocks of fc into s.vals; store writes them back.
func (s *indexedSet) load(fc map[key][9]float64) {
	for i, k := range s.keys {
		s.vals[i] = fc[k]
	}
}

func (s *indexedSet) store(fc map[key][9]float64) {
	for i, k := range s.keys {
		fc[k] = s.vals[i]
	}
}

// invariance is the set's invariance (above) on the loaded blocks. A pure
// translation does not rotate a block (its C is the identity exactly:
// spaceGroup), so its blocks are compared as they are.
func (s *indexedSet) invariance(ctx context.Context) (float64, error) {
	var v float64
	for x := range s.gens {
		if err := ctx.Err(); err != nil {
			return 0, err
		}
		c, img := &s.gens[x].cart, s.img[x]
		for i := range s.vals {
			rot := &s.vals[i]
			var r [9]float64
			if x >= s.ntrans {
				r = rotate(c, rot)
				rot = &r
			}
			im := &s.vals[img[i]]
			for a := range rot {
				if d := math.Abs(rot[a] - im[a]); d > v {
					v = d
				}
			}
		}
	}
	return v, nil
}

// average replaces the loaded blocks by their group average: over the
// translations, then over one operation per rotation (the factorisation
// at the top of this file).
func (s *indexedSet) average(ctx context.Context) error {
	for _, part := range [][2]int{{0, s.ntrans}, {s.ntrans, len(s.gens)}} {
		out := make([][9]float64, len(s.vals))
		w := 1 / float64(part[1]-part[0])
		for x := part[0]; x < part[1]; x++ {
			if err := ctx.Err(); err != nil {
				return err
			}
			c, img := &s.gens[x].cart, s.img[x]
			for i := range s.vals {
				rot := s.vals[i]
				if x >= s.ntrans {
					rot = rotate(c, &rot)
				}
				b := &out[img[i]]
				for a := range b {
					b[a] += w * rot[a]
				}
			}
		}
		s.vals = out
	}
	return nil
}
