package fcimport

import (
	"context"
	"encoding/binary"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/lattice"
)

// symOp is a space-group operation of the primitive cell acting on atoms:
// fractional x goes to rot·x + t with rot·x_i + t = x_perm[i] + shift[i],
// so site i of cell n goes to site perm[i] of cell rot·n + shift[i], and
// a force-constant block goes to C Φ Cᵀ (cart is C, the rotation in
// Cartesian coordinates).
type symOp struct {
	rot   [3][3]int
	perm  []int
	shift [][3]int
	cart  [3][3]float64
}

// spaceGroup returns the operations (R, t) of c's lattice and sites within
// tolA (Å): R from lattice.PointGroup, and for each R every translation
// t = x_j − R·x_0 (j a site of site 0's mass) that puts every site within
// tolA (Cartesian, modulo the lattice) of a site of the same mass — the
// site test of the core's Model.Symmetry. Unlike the core, which keeps one
// translation per rotation (enough in q-space), it keeps them all, so that
// a cell that is not primitive gets its internal translations and the set
// is a group; rotations that mix the first p Cartesian axes with the
// others are left out, as the core does. An error (a *physics.
// ValidationError) says the operations found do not form a group (sites
// of one mass closer than the tolerance). It returns ctx.Err() if ctx ends
// first.
func spaceGroup(ctx context.Context, c *physics.Crystal, tolA float64) ([]symOp, error) {
	d := c.Dim()
	var lat [3][3]float64
	copy(lat[:], c.Lattice)
	recip := lattice.Reciprocal(lat, d)
	shortest := math.Inf(1)
	for k := 0; k < d; k++ {
		shortest = math.Min(shortest, lattice.Norm(lat[k]))
	}
	polTol := 1e-8 + float64(1+d)*tolA/shortest
	bins := newSiteBins(c, recip, tolA)
	var ops []symOp
	for _, r := range lattice.PointGroup(lat, d, tolA) {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		cart := cartesian(lat, recip, d, r)
		if r == lattice.Identity() {
			// A pure translation rotates nothing: exactly the identity,
			// not its rounded Cartesian form.
			cart = [3][3]float64{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}}
		}
		if mixesPolarizations(cart, c.P(), polTol) {
			continue
		}
		ops = append(ops, siteMaps(c, lat, r, cart, tolA, bins)...)
	}
	if err := closed(ctx, ops, d); err != nil {
		return nil, err
	}
	return ops, nil
}

// cartesian is C = Σ_kl a_k R_kl b_lᵀ/2π on the lattice span plus the
// identity on its orthogonal complement (d < 3): x = Σ f_k a_k goes to
// Σ (R f)_k a_k, with f_l = b_l·x/2π.
func cartesian(lat, recip [3][3]float64, d int, r [3][3]int) [3][3]float64 {
	var c [3][3]float64
	for x := 0; x < 3; x++ {
		for y := 0; y < 3; y++ {
			var s, proj float64
			for k := 0; k < d; k++ {
				for l := 0; l < d; l++ {
					s += lat[k][x] * float64(r[k][l]) * recip[l][y]
				}
				proj += lat[k][x] * recip[k][y]
			}
			c[x][y] = (s - proj) / (2 * math.Pi)
			if x == y {
				c[x][y]++
			}
		}
	}
	return c
}

// mixesPolarizations reports that C mixes the first p axes (the ones the
// atoms move along) with the others by more than tol.
func mixesPolarizations(c [3][3]float64, p int, tol float64) bool {
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			if (a < p) != (b < p) && math.Abs(c[a][b]) > tol {
				return true
			}
		}
	}
	return false
}

// siteMaps returns an operation for every translation that, with the
// rotation r, maps every site onto a site of its mass within tolA.
func siteMaps(c *physics.Crystal, lat [3][3]float64, r [3][3]int, cart [3][3]float64, tolA float64, bins *siteBins) []symOp {
	d, ns := c.Dim(), len(c.Sites)
	rx := make([][3]float64, ns)
	for i, s := range c.Sites {
		for a := 0; a < d; a++ {
			for b := 0; b < d; b++ {
				rx[i][a] += float64(r[a][b]) * s.Frac[b]
			}
		}
	}
	var ops []symOp
	used := make([]bool, ns)
	for j0 := range c.Sites {
		if c.Sites[j0].MassAmu != c.Sites[0].MassAmu {
			continue
		}
		var t [3]float64
		for a := 0; a < d; a++ {
			t[a] = c.Sites[j0].Frac[a] - rx[0][a]
			t[a] -= math.Floor(t[a])
		}
		op := symOp{rot: r, cart: cart, perm: make([]int, ns), shift: make([][3]int, ns)}
		clear(used)
		if mapSites(c, lat, rx, t, tolA, &op, bins, used) {
			ops = append(ops, op)
		}
	}
	return ops
}

// mapSites fills op.perm and op.shift for the images rx[i] + t of the
// sites; false when a site lands on no free site of its mass. Site i goes
// to the lowest-numbered free site of its mass within tolA (Cartesian,
// modulo the lattice), found among the sites of the bins next to the
// image (siteBins) rather than among all sites. used is scratch of one
// flag a site, all false on entry.
func mapSites(c *physics.Crystal, lat [3][3]float64, rx [][3]float64, t [3]float64, tolA float64, op *symOp, bins *siteBins, used []bool) bool {
	d := c.Dim()
	for i := range c.Sites {
		var p [3]float64
		for a := 0; a < d; a++ {
			p[a] = rx[i][a] + t[a]
		}
		best, bestCell := -1, [3]float64{}
		bins.near(p, func(j int) {
			sj := c.Sites[j]
			if used[j] || sj.MassAmu != c.Sites[i].MassAmu || best >= 0 && j > best {
				return
			}
			if cell, dist := roundedImage(lat, d, p, sj.Frac); dist < tolA {
				best, bestCell = j, cell
			}
		})
		if best < 0 {
			return false
		}
		op.perm[i], used[best] = best, true
		for a := 0; a < d; a++ {
			op.shift[i][a] = int(bestCell[a])
		}
	}
	return true
}

// roundedImage returns the cell offset of site position frac nearest to
// fractional point p along each axis (rounded), and the Cartesian distance
// (Å) between p and the site in that cell.
func roundedImage(lat [3][3]float64, d int, p [3]float64, frac []float64) ([3]float64, float64) {
	var diff, cell [3]float64
	for a := 0; a < d; a++ {
		diff[a] = p[a] - frac[a]
		cell[a] = math.Round(diff[a])
		diff[a] -= cell[a]
	}
	var x [3]float64
	for a := 0; a < d; a++ {
		x = lattice.Add(x, lattice.Scale(lat[a], diff[a]))
	}
	return cell, lattice.Norm(x)
}

// siteBins files the sites by their fractional coordinates (modulo 1) in
// a periodic grid of bins at least as wide, along each axis k, as the
// largest change tolA (Å) can make to that coordinate, tolA·|b_k|/2π (b_k
// the reciprocal vectors): every site within tolA of a point is then in
// the point's bin or a neighbouring one. The grid has about 8 bins a site
// at most, so looking a point up costs O(1) sites on average.
type siteBins struct {
	d    int
	m    [3]int
	bins [][]int32 // sites of each bin, ascending
}

func newSiteBins(c *physics.Crystal, recip [3][3]float64, tolA float64) *siteBins {
	d, n := c.Dim(), len(c.Sites)
	b := &siteBins{d: d, m: [3]int{1, 1, 1}}
	limit := 2*int(math.Ceil(math.Pow(float64(n), 1/float64(d)))) + 1
	total := 1
	for k := 0; k < d; k++ {
		reach := tolA * lattice.Norm(recip[k]) / (2 * math.Pi)
		m := limit
		if reach > 0 {
			m = min(limit, int(math.Floor(1/reach)))
		}
		b.m[k] = max(1, m)
		total *= b.m[k]
	}
	b.bins = make([][]int32, total)
	for j, s := range c.Sites {
		var f [3]float64
		copy(f[:], s.Frac)
		x := b.index(b.cell(f))
		b.bins[x] = append(b.bins[x], int32(j))
	}
	return b
}

// cell is the bin of fractional point f along each axis.
func (b *siteBins) cell(f [3]float64) [3]int {
	var c [3]int
	for k := 0; k < b.d; k++ {
		u := f[k] - math.Floor(f[k])
		c[k] = min(int(u*float64(b.m[k])), b.m[k]-1)
	}
	return c
}

// index is the bin number of a cell.
func (b *siteBins) index(c [3]int) int { return (c[0]*b.m[1]+c[1])*b.m[2] + c[2] }

// near calls visit for every site in the bins next to (and in) the bin of
// fractional point p, each bin once.
func (b *siteBins) near(p [3]float64, visit func(j int)) {
	c := b.cell(p)
	var span [3][]int
	for k := 0; k < 3; k++ {
		switch {
		case k >= b.d || b.m[k] == 1:
			span[k] = []int{0}
		case b.m[k] == 2:
			span[k] = []int{0, 1}
		default:
			span[k] = []int{(c[k] + b.m[k] - 1) % b.m[k], c[k], (c[k] + 1) % b.m[k]}
		}
	}
	for _, x := range span[0] {
		for _, y := range span[1] {
			for _, z := range span[2] {
				for _, j := range b.bins[b.index([3]int{x, y, z})] {
					visit(int(j))
				}
			}
		}
	}
}

// compose returns g∘h (h first): site i of cell n goes by h to site h.π(i)
// of cell h.R·n + h.S_i, then by g to site g.π(h.π(i)) of cell
// g.R·h.R·n + g.R·h.S_i + g.S_{h.π(i)}.
func compose(g, h *symOp, d int) symOp {
	out := symOp{perm: make([]int, len(h.perm)), shift: make([][3]int, len(h.perm))}
	composeInto(&out, g, h, d)
	return out
}

// composeInto is compose writing into out (perm and shift of the right
// length, reused).
func composeInto(out *symOp, g, h *symOp, d int) {
	out.rot = [3][3]int{}
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			for k := 0; k < 3; k++ {
				out.rot[a][b] += g.rot[a][k] * h.rot[k][b]
			}
		}
	}
	for i, hi := range h.perm {
		out.perm[i] = g.perm[hi]
		out.shift[i] = [3]int{}
		for a := 0; a < d; a++ {
			for b := 0; b < d; b++ {
				out.shift[i][a] += g.rot[a][b] * h.shift[i][b]
			}
			out.shift[i][a] += g.shift[hi][a]
		}
	}
}

// signature identifies what an operation does to pairs of atoms: its
// rotation, permutation and shifts relative to site 0's (a common lattice
// translation changes no pair).
func signature(op *symOp, d int) string { return string(appendSignature(nil, op, d)) }

// appendSignature appends op's signature to b.
func appendSignature(b []byte, op *symOp, d int) []byte {
	for a := 0; a < d; a++ {
		for c := 0; c < d; c++ {
			b = binary.AppendVarint(b, int64(op.rot[a][c]))
		}
	}
	for i, p := range op.perm {
		b = binary.AppendVarint(b, int64(p))
		for a := 0; a < d; a++ {
			b = binary.AppendVarint(b, int64(op.shift[i][a]-op.shift[0][a]))
		}
	}
	return b
}

// closed checks that every product of two operations is one of them (so
// that averaging over them is a projection). Rather than all |G|² products
// (9.4 million for the 3 072 operations of a 128-site supercell-like
// cell), it grows the group generated by the operations from generators
// picked among them, multiplying each element found by each generator
// until nothing new appears: the set is closed exactly when no product
// ever leaves it (the generated group then lies inside the set, which
// contains the generators). A group of order m has a generating set of at
// most log₂ m elements, and each element is multiplied by each generator
// once per generator added, so the work is O(|G| log²|G|) products.
func closed(ctx context.Context, ops []symOp, d int) error {
	index := make(map[string]int, len(ops))
	for x := range ops {
		index[signature(&ops[x], d)] = x
	}
	notGroup := func() error {
		var vs physics.Violations
		vs.Add("supercell_fc", "the %d symmetry operations found within the symmetry tolerance do not form a group (sites of one mass closer than it?): give a smaller symmetry tolerance", len(ops))
		return vs.Err()
	}
	if len(ops) == 0 {
		return nil
	}
	n := len(ops[0].perm)
	scratch := symOp{perm: make([]int, n), shift: make([][3]int, n)}
	var sig []byte
	in := make([]bool, len(ops))
	var gens, elems []int
	for x := range ops {
		if in[x] {
			continue
		}
		gens = append(gens, x)
		in[x] = true
		elems = append(elems, x)
		// Every element times every generator, the new ones included as
		// they are found (elems grows while it is walked).
		for i := 0; i < len(elems); i++ {
			if i%256 == 0 {
				if err := ctx.Err(); err != nil {
					return err
				}
			}
			for _, g := range gens {
				composeInto(&scratch, &ops[g], &ops[elems[i]], d)
				sig = appendSignature(sig[:0], &scratch, d)
				y, ok := index[string(sig)]
				if !ok {
					return notGroup()
				}
				if !in[y] {
					in[y] = true
					elems = append(elems, y)
				}
			}
		}
	}
	return nil
}
