// Symmetrize: a model made exactly symmetric under the operations found
// within its symmetry tolerance.

package physics

import (
	"context"
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"

	"github.com/materials-lab/modegrid/physics/lattice"
)

// Symmetrize returns c made exactly symmetric (to rounding) under the
// operations its model has within opt.SymTolA (Model.Symmetry), with the
// number of those operations. The result is a new description, so it
// compiles to a new model with its own hash (the same one only when c was
// already exactly symmetric):
//
//   - the lattice metric G is averaged over the rotations, Ḡ = Σ RᵀGR/N,
//     which makes it exact for the lattice type the operations imply
//     (equal lengths, 90° and 120° angles), and the lattice vectors are
//     moved the least way that has that metric: a' = Ḡ^½ G^−½ a (rows in
//     the span of the given ones, so a 2D lattice stays in its plane);
//   - fractional positions are averaged over the images of the group,
//     x̄_j = Σ_g (R_g x_i + t_g − S_gi)/N over the g with π_g(i) = j, with
//     each t_g the mean over all sites of x_π(i) + S_i − R x_i: those
//     translations make the group exact about the mean displacement of
//     the sites (a shift of origin), so the averages are exactly
//     invariant;
//   - springs and shells are kept as given and so recomputed from the new
//     positions when the result is compiled;
//   - explicit blocks are summed per bond and averaged over the group,
//     Φ̄(i; n j) = Σ_g C_gᵀ Φ(g(i); g(n j)) C_g / N, one block per bond
//     (missing images count as zero);
//   - Born charges and ε∞ are averaged as the tensors they are,
//     Z̄_i = Σ_g C_gᵀ Z_{g(i)} C_g / N and ε̄ = Σ_g C_gᵀ ε C_g / N.
//
// Errors are those of Compile and Symmetry (ctx ending first included).
func Symmetrize(ctx context.Context, c *Crystal, opt Options) (*Crystal, int, error) {
	m, err := Compile(ctx, c, opt)
	if err != nil {
		return nil, 0, err
	}
	ops, err := m.Symmetry(ctx)
	if err != nil {
		return nil, 0, err
	}
	out := *c
	out.Lattice, err = symmetricLattice(m, ops)
	if err != nil {
		return nil, 0, err
	}
	out.Sites = append([]Site(nil), c.Sites...)
	for i, f := range m.symmetricPositions(ops) {
		out.Sites[i].Frac = f
	}
	if len(c.Blocks) > 0 {
		out.Blocks = m.symmetricBlocks(ops, c.Blocks)
	}
	symmetricPolar(ops, c, &out)
	return &out, len(ops), nil
}

// symmetricLattice returns the lattice vectors with the group-averaged
// metric, a' = Ḡ^½ G^−½ a.
func symmetricLattice(m *Model, ops []SymOp) ([][3]float64, error) {
	d := m.dim
	g := mat.NewSymDense(d, nil)
	gbar := mat.NewSymDense(d, nil)
	for i := 0; i < d; i++ {
		for j := i; j < d; j++ {
			g.SetSym(i, j, lattice.Dot(m.lattice[i], m.lattice[j]))
			var s float64
			for _, op := range ops {
				for k := 0; k < d; k++ {
					for l := 0; l < d; l++ {
						s += float64(op.Rot[k][i]*op.Rot[l][j]) * lattice.Dot(m.lattice[k], m.lattice[l])
					}
				}
			}
			gbar.SetSym(i, j, s/float64(len(ops)))
		}
	}
	root, err := symPow(gbar, 0.5)
	if err != nil {
		return nil, err
	}
	invRoot, err := symPow(g, -0.5)
	if err != nil {
		return nil, err
	}
	var a mat.Dense
	a.Mul(root, invRoot)
	out := make([][3]float64, d)
	for i := 0; i < d; i++ {
		for k := 0; k < d; k++ {
			out[i] = lattice.Add(out[i], lattice.Scale(m.lattice[k], a.At(i, k)))
		}
	}
	return out, nil
}

// symPow returns s^p for a symmetric positive definite s.
func symPow(s *mat.SymDense, p float64) (*mat.Dense, error) {
	var eig mat.EigenSym
	if !eig.Factorize(s, true) {
		return nil, fmt.Errorf("symmetrize: the lattice metric could not be diagonalised")
	}
	vals := eig.Values(nil)
	var v mat.Dense
	eig.VectorsTo(&v)
	n := len(vals)
	out := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			var x float64
			for k := 0; k < n; k++ {
				x += v.At(i, k) * math.Pow(vals[k], p) * v.At(j, k)
			}
			out.Set(i, j, x)
		}
	}
	return out, nil
}

// symmetricPositions returns the fractional positions averaged over the
// group (see Symmetrize for why the translations are re-derived).
func (m *Model) symmetricPositions(ops []SymOp) [][]float64 {
	d, ns := m.dim, m.nsites
	sum := make([][3]float64, ns)
	for _, op := range ops {
		rx := make([][3]float64, ns)
		var t [3]float64
		for i := 0; i < ns; i++ {
			for a := 0; a < d; a++ {
				for b := 0; b < d; b++ {
					rx[i][a] += float64(op.Rot[a][b]) * m.frac[i][b]
				}
				t[a] += (m.frac[op.Perm[i]][a] + float64(op.Shift[i][a]) - rx[i][a]) / float64(ns)
			}
		}
		for i := 0; i < ns; i++ {
			j := op.Perm[i]
			for a := 0; a < d; a++ {
				// The image lands near x_j + S_i; bring it next to x_j.
				sum[j][a] += rx[i][a] + t[a] - float64(op.Shift[i][a])
			}
		}
	}
	out := make([][]float64, ns)
	for j := range out {
		out[j] = make([]float64, d)
		for a := 0; a < d; a++ {
			out[j][a] = posZero(sum[j][a] / float64(len(ops)))
		}
	}
	return out
}

// blockKey is a directed bond of explicit blocks: site i in cell 0 to site
// j in cell n.
type blockKey struct {
	i, j int
	n    [3]int
}

// symmetricBlocks sums the blocks per directed bond (each given block and
// the transpose of its reverse), averages every bond in the union of the
// orbits over the group, and returns one block per undirected bond and
// one per on-site block.
func (m *Model) symmetricBlocks(ops []SymOp, blocks []Block) []Block {
	d := m.dim
	given := map[blockKey][9]float64{}
	addTo := func(k blockKey, phi [9]float64) {
		s := given[k]
		for a := range s {
			s[a] += phi[a]
		}
		given[k] = s
	}
	for _, b := range blocks {
		var phi [9]float64
		copy(phi[:], b.Phi)
		k := blockKey{b.From, b.To, cellOf(b.Cell)}
		addTo(k, phi)
		if k.i != k.j || k.n != ([3]int{}) {
			addTo(blockKey{k.j, k.i, neg3(k.n)}, transpose9(phi))
		}
	}
	image := func(op *SymOp, k blockKey) blockKey {
		var n [3]int
		for a := 0; a < d; a++ {
			for b := 0; b < d; b++ {
				n[a] += op.Rot[a][b] * k.n[b]
			}
			n[a] += op.Shift[k.j][a] - op.Shift[k.i][a]
		}
		return blockKey{op.Perm[k.i], op.Perm[k.j], n}
	}
	keys := map[blockKey]bool{}
	for k := range given {
		for x := range ops {
			keys[image(&ops[x], k)] = true
		}
	}
	var out []Block
	for k := range keys {
		rev := blockKey{k.j, k.i, neg3(k.n)}
		if rev != k && keys[rev] && !keyLess(k, rev) {
			continue // the reverse bond carries it
		}
		var avg [9]float64
		for x := range ops {
			phi := given[image(&ops[x], k)]
			c := &ops[x].Cart
			// Cᵀ Φ C: Φ(g(i); g(n j)) = C Φ(i; n j) Cᵀ for a symmetric model.
			for a := 0; a < 3; a++ {
				for b := 0; b < 3; b++ {
					var s float64
					for e := 0; e < 3; e++ {
						for f := 0; f < 3; f++ {
							s += c[e][a] * phi[3*e+f] * c[f][b]
						}
					}
					avg[3*a+b] += s / float64(len(ops))
				}
			}
		}
		cell := make([]int, d)
		copy(cell, k.n[:d])
		phi := make([]float64, 9)
		for a := range phi {
			phi[a] = posZero(avg[a])
		}
		out = append(out, Block{From: k.i, To: k.j, Cell: cell, Phi: phi})
	}
	sortBlocks(out)
	return out
}

// keyLess orders bond keys: by i, j, then n.
func keyLess(a, b blockKey) bool {
	if a.i != b.i {
		return a.i < b.i
	}
	if a.j != b.j {
		return a.j < b.j
	}
	for k := range a.n {
		if a.n[k] != b.n[k] {
			return a.n[k] < b.n[k]
		}
	}
	return false
}

// sortBlocks puts blocks in keyLess order, so the output does not depend
// on map iteration.
func sortBlocks(bs []Block) {
	key := func(b Block) blockKey { return blockKey{b.From, b.To, cellOf(b.Cell)} }
	sort.Slice(bs, func(x, y int) bool { return keyLess(key(bs[x]), key(bs[y])) })
}
