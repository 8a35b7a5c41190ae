// Reduction of grids by integer q-space rotations and time reversal.

package mesh

import (
	"context"
	"fmt"
	"math"
	"strings"
)

// IrreducibleGrid is a regular grid reduced by the model's symmetry and
// time reversal: the irreducible points, their integer multiplicities, and
// the table that unfolds them back onto every grid point.
type IrreducibleGrid struct {
	Spec GridSpec
	// Rots are the q-space rotations (integer, acting on fractional q)
	// that map this grid onto itself, in the caller's order (the identity
	// first); OpIndex values refer to this slice.
	Rots [][3][3]int
	// Irr are the grid indices (grid order) of the irreducible points,
	// ascending; Mult their multiplicities (Σ Mult = number of points).
	Irr  []int
	Mult []int
	// Slot[g] is the position in Irr of the representative of grid point g,
	// and OpIndex[g] the operation taking the representative q to g:
	// k ≥ 0 means q_g ≡ Ops[k]·q, k < 0 means q_g ≡ −Ops[−k−1]·q (time
	// reversal composed with the operation).
	Slot    []int32
	OpIndex []int16
}

func irrKey(rots [][3][3]int, spec GridSpec) string { return "irr:" + reduceKey(rots, spec) }

func reduceKey(rots [][3][3]int, spec GridSpec) string {
	var b strings.Builder
	fmt.Fprintf(&b, "%v/%v/%v;", spec.Mesh, spec.Shifted, spec.Finite)
	for _, rot := range rots {
		fmt.Fprint(&b, rot)
	}
	return b.String()
}

// Compatible reports that the q-space rotation maps every point of the grid
// onto a point of the grid: by linearity it is enough that the first point
// lands on the grid and each unit step becomes a whole number of steps.
func Compatible(rot [3][3]int, spec GridSpec) bool {
	var origin [3]float64
	for k := 0; k < 3; k++ {
		origin[k] = spec.Offset(k) / float64(spec.Mesh[k])
	}
	img := applyQ(rot, origin)
	for k := 0; k < 3; k++ {
		if !nearInt(img[k]*float64(spec.Mesh[k]) - spec.Offset(k)) {
			return false
		}
	}
	for l := 0; l < 3; l++ {
		var step [3]float64
		step[l] = 1 / float64(spec.Mesh[l])
		img := applyQ(rot, step)
		for k := 0; k < 3; k++ {
			if !nearInt(img[k] * float64(spec.Mesh[k])) {
				return false
			}
		}
	}
	return true
}

func nearInt(x float64) bool { return math.Abs(x-math.Round(x)) < 1e-6 }

// reduce builds the orbits of the grid under ±rots. It works in integer
// grid coordinates: with q_k = (a_k + s_k)/N_k, an operation compatible
// with the grid maps a to a'_k = Σ_l M_kl a_l + c_k (mod N_k), with
// M_kl = S_kl N_k/N_l and c_k = Σ_l S_kl N_k s_l/N_l − s_k both integers
// (Compatible checked that); time reversal maps a'_k to −a'_k − 2 s_k.
// It polls ctx every reducePoll grid points.
func reduce(ctx context.Context, rots [][3][3]int, spec GridSpec) (*IrreducibleGrid, error) {
	n := spec.Count()
	N := spec.Mesh
	var off [3]float64
	var tr [3]int // −2 s_k
	for k := range off {
		off[k] = spec.Offset(k)
		tr[k] = -int(math.Round(2 * off[k]))
	}
	type intOp struct {
		m [3][3]int
		c [3]int
	}
	iops := make([]intOp, len(rots))
	for x, rot := range rots {
		for k := 0; k < 3; k++ {
			cf := -off[k]
			for l := 0; l < 3; l++ {
				iops[x].m[k][l] = int(math.Round(float64(rot[k][l]*N[k]) / float64(N[l])))
				cf += float64(rot[k][l]) * float64(N[k]) * off[l] / float64(N[l])
			}
			iops[x].c[k] = int(math.Round(cf))
		}
	}
	mod := func(x, m int) int {
		x %= m
		if x < 0 {
			x += m
		}
		return x
	}
	// Irr and Mult get the capacity of the bound on their length (every
	// group here holds time reversal) and are trimmed at the end, so the
	// memory reduce takes is known in advance (see GridModesCost).
	ub := IrreducibleUpperBound(n, spec.dim)
	ir := &IrreducibleGrid{Spec: spec, Rots: rots, Slot: make([]int32, n), OpIndex: make([]int16, n),
		Irr: make([]int, 0, ub), Mult: make([]int, 0, ub)}
	visited := make([]bool, n)
	for g := 0; g < n; g++ {
		if g%reducePoll == 0 && ctx.Err() != nil {
			return nil, ctx.Err()
		}
		if visited[g] {
			continue
		}
		a := [3]int{g / (N[1] * N[2]), (g / N[2]) % N[1], g % N[2]}
		slot := int32(len(ir.Irr))
		mult := 0
		for k := range iops {
			op := &iops[k]
			var img, neg [3]int
			for x := 0; x < 3; x++ {
				v := op.m[x][0]*a[0] + op.m[x][1]*a[1] + op.m[x][2]*a[2] + op.c[x]
				img[x] = mod(v, N[x])
				neg[x] = mod(-v+tr[x], N[x])
			}
			for sign, c := range [2][3]int{img, neg} {
				h := (c[0]*N[1]+c[1])*N[2] + c[2]
				if visited[h] {
					continue
				}
				visited[h] = true
				ir.Slot[h] = slot
				if sign == 0 {
					ir.OpIndex[h] = int16(k)
				} else {
					ir.OpIndex[h] = int16(-k - 1)
				}
				mult++
			}
		}
		ir.Irr = append(ir.Irr, g)
		ir.Mult = append(ir.Mult, mult)
	}
	if len(ir.Irr) < cap(ir.Irr)/2 {
		ir.Irr = append([]int(nil), ir.Irr...)
		ir.Mult = append([]int(nil), ir.Mult...)
	}
	return ir, nil
}

// reducePoll is the number of grid points between two polls of the
// context in reduce: each costs at most 2·48 images, so a poll every
// 4 096 points is a fraction of a millisecond apart.
const reducePoll = 4096

// IrreducibleUpperBound bounds the number of irreducible points of an
// n-point grid of a d-dimensional crystal under any symmetry: time
// reversal alone pairs every point with another except those fixed by
// q → −q (at most 2^d of them), so at most (n + 2^d)/2 orbits remain.
func IrreducibleUpperBound(n, dim int) int {
	d := min(max(dim, 1), 3)
	return min(n, (n+(1<<d)+1)/2)
}

// Bytes is the memory held by the reduction tables: Slot (4 B) and
// OpIndex (2 B) per grid point, Irr and Mult (8 B each) per irreducible
// point.
func (ir *IrreducibleGrid) Bytes() int64 {
	return int64(6*len(ir.Slot) + 16*len(ir.Irr))
}

// Reduce returns the irreducible points of the normalised grid spec (see
// GridSpec.Check) under the q-space rotations rots — each compatible with
// the grid (Compatible), the identity first — and time reversal. With a
// cache (nil: none) the reduction is kept there and shared by every caller
// with the same rotations and grid. The reduction of a large grid polls
// ctx, and ctx.Err() is returned when ctx ends first (nothing partial is
// cached).
func Reduce(ctx context.Context, rots [][3][3]int, spec GridSpec, cache *ReductionCache) (*IrreducibleGrid, error) {
	key := irrKey(rots, spec)
	if v, ok := cache.get(key); ok {
		return v.(*IrreducibleGrid), nil
	}
	ir, err := reduce(ctx, rots, spec)
	if err != nil {
		return nil, err
	}
	cache.put(key, ir)
	return ir, nil
}

// applyQ returns rot·q.
func applyQ(rot [3][3]int, q [3]float64) [3]float64 {
	var out [3]float64
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			out[a] += float64(rot[a][b]) * q[b]
		}
	}
	return out
}
