package fcimport

import (
	"context"
	"math"
	"sort"

	"github.com/materials-lab/modegrid/physics"
)

// fold folds every pair's block onto its nearest images. The pairs of
// one class (s, t, offset modulo the supercell) all have the same images,
// and no other class reaches them, so each class's blocks are averaged
// first — over the |det M| rows of site s with N×N rows, its one row with
// n×N — and the mean shared equally among the class's m images:
// Φ(s,0;t,R) = mean/m. The mean is ref + Σ(x − ref)/count, ref the block
// of the class's first row atom in (site, cell) order, summed in that
// order: the result does not depend on the order of the atoms, and a
// class of equal blocks (an N×N set written out from one row per site)
// gives ref exactly, so N×N and n×N spellings of the same data fold to
// the same bits (and the same model hash). It returns ctx.Err() if ctx
// ends first.
func (g *geometry) fold(ctx context.Context, s *Set, maps []atomMap) (map[key][9]float64, error) {
	n := len(s.Atoms)
	type mean struct {
		ref, dev [9]float64
		count    int
	}
	classes := map[imageKey]*mean{}
	var order []imageKey
	for _, x := range g.rowOrder(s, maps) {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		i := x.atom
		for j := 0; j < n; j++ {
			blk := s.Phi[9*(x.row*n+j) : 9*(x.row*n+j)+9]
			if s.LongRange != nil {
				blk = shortRange(blk, s.LongRange(maps[i].site, maps[j].site, cellDiff(maps[i], maps[j])))
			}
			ck, images := g.images(maps[i], maps[j])
			if len(images) > 1 {
				g.shared++
			}
			c := classes[ck]
			if c == nil {
				c = &mean{}
				copy(c.ref[:], blk)
				classes[ck] = c
				order = append(order, ck)
			}
			for a := range c.dev {
				c.dev[a] += blk[a] - c.ref[a]
			}
			c.count++
		}
	}
	fc := make(map[key][9]float64, len(order))
	for _, ck := range order {
		c := classes[ck]
		images := g.memo[ck]
		var b [9]float64
		for a := range b {
			b[a] = (c.ref[a] + c.dev[a]/float64(c.count)) / float64(len(images))
		}
		for _, r := range images {
			fc[key{ck.s, ck.t, r}] = b
		}
	}
	return fc, nil
}

// row is a row atom of the set: its index and its row of Φ.
type row struct{ atom, row int }

// rowOrder returns the set's row atoms in (site, cell) order.
func (g *geometry) rowOrder(s *Set, maps []atomMap) []row {
	var rows []row
	if len(s.PrimitiveAtoms) > 0 {
		for x, i := range s.PrimitiveAtoms {
			rows = append(rows, row{i, x})
		}
	} else {
		for i := range s.Atoms {
			rows = append(rows, row{i, i})
		}
	}
	sort.Slice(rows, func(a, b int) bool {
		x, y := maps[rows[a].atom], maps[rows[b].atom]
		if x.site != y.site {
			return x.site < y.site
		}
		for c := 0; c < 3; c++ {
			if x.cell[c] != y.cell[c] {
				return x.cell[c] < y.cell[c]
			}
		}
		return false
	})
	return rows
}

// imageKey names the pairs that share their nearest images: the two
// sites and the cell offset reduced modulo the supercell.
type imageKey struct {
	s, t int
	base [3]int
}

// images returns the class of the pair (atom i, atom j) and the lattice
// vectors R of the nearest periodic images of atom j seen from atom i
// (all within the tolerance of the nearest), memoised by class: the N²
// pairs have only n²·|det M| distinct ones.
func (g *geometry) images(i, j atomMap) (imageKey, [][3]int) {
	var base [3]int
	for c := 0; c < g.d; c++ {
		base[c] = j.cell[c] - i.cell[c]
	}
	base = g.reduce(base)
	k := imageKey{i.site, j.site, base}
	if r, ok := g.memo[k]; ok {
		return k, r
	}
	if g.memo == nil {
		g.memo = map[imageKey][][3]int{}
	}
	r := g.searchImages(i.site, j.site, base)
	g.memo[k] = r
	return k, r
}

// searchImages tries every supercell translation K in
// [−searchRange, searchRange]^d added to base and keeps the nearest. The
// candidates go into a buffer of the geometry, reused from call to call
// (the search runs once per pair class, up to n²·|det M| times: a slice a
// call was most of a large fold's allocation).
func (g *geometry) searchImages(si, sj int, base [3]int) [][3]int {
	lo, hi := [3]int{}, [3]int{}
	for c := 0; c < g.d; c++ {
		lo[c], hi[c] = -searchRange, searchRange
	}
	cs := g.cands[:0]
	var df [3]float64
	for k0 := lo[0]; k0 <= hi[0]; k0++ {
		for k1 := lo[1]; k1 <= hi[1]; k1++ {
			for k2 := lo[2]; k2 <= hi[2]; k2++ {
				k := [3]int{k0, k1, k2}
				r := base
				for row := 0; row < g.d; row++ {
					for c := 0; c < g.d; c++ {
						r[c] += k[row] * g.m[row*g.d+c]
					}
				}
				for c := 0; c < g.d; c++ {
					df[c] = g.frac[sj][c] + float64(r[c]) - g.frac[si][c]
				}
				x := g.cart(df[:g.d])
				cs = append(cs, imageCand{r, math.Sqrt(dot(x, x))})
			}
		}
	}
	g.cands = cs
	dmin := math.Inf(1)
	for _, c := range cs {
		dmin = math.Min(dmin, c.d)
	}
	n := 0
	for _, c := range cs {
		if c.d <= dmin+g.tol {
			n++
		}
	}
	out := make([][3]int, 0, n)
	for _, c := range cs {
		if c.d <= dmin+g.tol {
			out = append(out, c.r)
		}
	}
	return out
}

// imageCand is a candidate image of a pair: its cell offset and length.
type imageCand struct {
	r [3]int
	d float64
}

func neg(r [3]int) [3]int { return [3]int{-r[0], -r[1], -r[2]} }

func transpose(b [9]float64) [9]float64 {
	return [9]float64{b[0], b[3], b[6], b[1], b[4], b[7], b[2], b[5], b[8]}
}

// permutationViolation is max |Φ(s,0;t,R) − Φ(t,0;s,−R)ᵀ| over the set.
func permutationViolation(fc map[key][9]float64) float64 {
	var v float64
	for k, b := range fc {
		p := transpose(fc[key{k.t, k.s, neg(k.r)}])
		for a := range b {
			v = math.Max(v, math.Abs(b[a]-p[a]))
		}
	}
	return v
}

// permute imposes Φ(s,0;t,R) = Φ(t,0;s,−R)ᵀ by replacing both with their
// average (a missing partner counts as zero) and returns the violation
// before.
func permute(fc map[key][9]float64) float64 {
	before := permutationViolation(fc)
	for _, k := range sortedKeys(fc) {
		pk := key{k.t, k.s, neg(k.r)}
		b, p := fc[k], transpose(fc[pk])
		var avg [9]float64
		for a := range avg {
			avg[a] = (b[a] + p[a]) / 2
		}
		fc[k], fc[pk] = avg, transpose(avg)
	}
	return before
}

// sumRuleViolation is max |Σ_{t,R} Φ_αβ(s,0;t,R)| over sites and α, β.
func sumRuleViolation(fc map[key][9]float64, nsites int) float64 {
	var v float64
	for _, e := range residuals(fc, nsites) {
		for _, x := range e {
			v = math.Max(v, math.Abs(x))
		}
	}
	return v
}

// residuals returns E_s = Σ_{t,R} Φ(s,0;t,R) per site.
func residuals(fc map[key][9]float64, nsites int) [][9]float64 {
	e := make([][9]float64, nsites)
	for _, k := range sortedKeys(fc) {
		b := fc[k]
		for a := range b {
			e[k.s][a] += b[a]
		}
	}
	return e
}

// sortedKeys returns the keys in (s, t, R) order, for sums that do not
// depend on map order.
func sortedKeys(fc map[key][9]float64) []key {
	ks := make([]key, 0, len(fc))
	for k := range fc {
		ks = append(ks, k)
	}
	sort.Slice(ks, func(a, b int) bool {
		x, y := ks[a], ks[b]
		if x.s != y.s {
			return x.s < y.s
		}
		if x.t != y.t {
			return x.t < y.t
		}
		for c := 0; c < 3; c++ {
			if x.r[c] != y.r[c] {
				return x.r[c] < y.r[c]
			}
		}
		return false
	})
	return ks
}

// blocksOf returns the canonical half of the set (s < t, or s = t with R
// ≥ 0 lexicographically) as physics blocks; Compile adds the transposes.
func blocksOf(fc map[key][9]float64, d int) []physics.Block {
	var out []physics.Block
	for _, k := range sortedKeys(fc) {
		if k.s > k.t || (k.s == k.t && lessZero(k.r)) {
			continue
		}
		b := fc[k]
		out = append(out, physics.Block{From: k.s, To: k.t, Cell: append([]int(nil), k.r[:d]...), Phi: append([]float64(nil), b[:]...)})
	}
	return out
}

// lessZero reports whether r < 0 lexicographically.
func lessZero(r [3]int) bool {
	for _, x := range r {
		if x != 0 {
			return x < 0
		}
	}
	return false
}

// shortRange returns blk minus the long-range part lr, in a new slice.
func shortRange(blk []float64, lr [9]float64) []float64 {
	out := make([]float64, 9)
	for a := range out {
		out[a] = blk[a] - lr[a]
	}
	return out
}

// cellDiff is the cell offset of atom j seen from atom i.
func cellDiff(i, j atomMap) [3]int {
	return [3]int{j.cell[0] - i.cell[0], j.cell[1] - i.cell[1], j.cell[2] - i.cell[2]}
}
