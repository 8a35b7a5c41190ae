package testmodels

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/lattice"
)

// Crystals of a chosen size, for the size ladders of the benchmarks and
// the tests that run the engine at the sizes of first-principles cells.

// CubicPair is an invented two-site crystal on a simple cubic lattice (a =
// 3.1 Å): site A (30 amu) at the corner, B (70 amu) at the body centre,
// with explicit springs — A–B to the 8 nearest neighbours, A–A and B–B
// along the cube edges. Its point group is the full cubic group (48
// operations); its springs are explicit so that every bond of a supercell
// can be given its own constant.
func CubicPair() *physics.Crystal {
	c := &physics.Crystal{
		Name:    "cubic pair",
		Lattice: [][3]float64{{3.1, 0, 0}, {0, 3.1, 0}, {0, 0, 3.1}},
		Sites: []physics.Site{
			{Label: "A", MassAmu: 30, Frac: []float64{0, 0, 0}},
			{Label: "B", MassAmu: 70, Frac: []float64{0.5, 0.5, 0.5}},
		},
	}
	for _, x := range []int{0, -1} {
		for _, y := range []int{0, -1} {
			for _, z := range []int{0, -1} {
				c.Springs = append(c.Springs, physics.Spring{From: 0, To: 1, Cell: []int{x, y, z}, KLong: 4, KTrans: 0.5})
			}
		}
	}
	for k := 0; k < 3; k++ {
		cell := []int{0, 0, 0}
		cell[k] = 1
		c.Springs = append(c.Springs,
			physics.Spring{From: 0, To: 0, Cell: cell, KLong: 1.5, KTrans: 0.2},
			physics.Spring{From: 1, To: 1, Cell: append([]int(nil), cell...), KLong: 1.2, KTrans: 0.15})
	}
	return c
}

// CubicPairSupercell is CubicPair as an n1×n2×n3 supercell written as a
// primitive cell of 2·n1·n2·n3 sites.
func CubicPairSupercell(t testing.TB, n1, n2, n3 int) *physics.Crystal {
	return Supercell(t, CubicPair(), [3][3]int{{n1, 0, 0}, {0, n2, 0}, {0, 0, n3}})
}

// SizedShape returns the supercell of CubicPair with the given number of
// sites (8, 16, 32, 64, 128, 256 or 512): as close to a cube as the count
// allows.
func SizedShape(sites int) ([3]int, error) {
	shapes := map[int][3]int{
		8: {2, 2, 1}, 16: {2, 2, 2}, 32: {2, 2, 4}, 64: {4, 4, 2},
		128: {4, 4, 4}, 256: {4, 4, 8}, 512: {8, 8, 4},
	}
	s, ok := shapes[sites]
	if !ok {
		return s, fmt.Errorf("no supercell shape of %d sites", sites)
	}
	return s, nil
}

// Sized returns the CubicPair supercell of the given number of sites (see
// SizedShape).
func Sized(t testing.TB, sites int) *physics.Crystal {
	t.Helper()
	s, err := SizedShape(sites)
	if err != nil {
		t.Fatal(err)
	}
	return CubicPairSupercell(t, s[0], s[1], s[2])
}

// Distorted returns a copy of c with every site moved by a random
// Cartesian displacement (each component uniform in ±posA, Å) and every
// spring's two constants multiplied by 1 + u·rel, u uniform in [−1, 1]
// (one u per spring). Displacements well below the symmetry tolerance
// keep the symmetry (tolerance noise); above it, or a rel far above
// SymFCTol, break it.
func Distorted(c *physics.Crystal, rng *rand.Rand, posA, rel float64) *physics.Crystal {
	out := Clone(c)
	d := len(c.Lattice)
	var lat [3][3]float64
	copy(lat[:], c.Lattice)
	recip := lattice.Reciprocal(lat, d) // Δf_k = b_k·Δr/2π
	for i := range out.Sites {
		var dr [3]float64
		for a := 0; a < 3; a++ {
			dr[a] = posA * (2*rng.Float64() - 1)
		}
		for k := 0; k < d; k++ {
			out.Sites[i].Frac[k] += lattice.Dot(recip[k], dr) / (2 * math.Pi)
		}
	}
	for i := range out.Springs {
		f := 1 + rel*(2*rng.Float64()-1)
		out.Springs[i].KLong *= f
		out.Springs[i].KTrans *= f
	}
	return out
}

// FarSprings returns a copy of c whose springs are replaced by one
// between every pair of sites (each bond once) in every cell n with |n_k| ≤ reach (and
// within cutA, Å), of constants decaying with the bond length r as
// k∥ = k0·e^{−r/λ}, k⊥ = k∥/10: a model with as many cell offsets as the
// folded force constants of a (2·reach+1)-fold supercell, for the
// benchmarks and tests of the dynamical matrix of such models.
func FarSprings(c *physics.Crystal, reach int, cutA, k0, lambdaA float64) *physics.Crystal {
	out := Clone(c)
	out.Springs = nil
	d := len(c.Lattice)
	var lat [3][3]float64
	copy(lat[:], c.Lattice)
	pos := func(i int, n [3]int) [3]float64 {
		var r [3]float64
		for k := 0; k < d; k++ {
			f := c.Sites[i].Frac[k] + float64(n[k])
			r = lattice.Add(r, lattice.Scale(lat[k], f))
		}
		return r
	}
	var lim [3]int
	for k := 0; k < d; k++ {
		lim[k] = reach
	}
	var n [3]int
	for n[0] = -lim[0]; n[0] <= lim[0]; n[0]++ {
		for n[1] = -lim[1]; n[1] <= lim[1]; n[1]++ {
			for n[2] = -lim[2]; n[2] <= lim[2]; n[2]++ {
				for i := range c.Sites {
					for j := i; j < len(c.Sites); j++ {
						if i == j && !lessCellZero(n) {
							continue // each bond of a site with its own images once
						}
						r := lattice.Norm(lattice.Sub(pos(j, n), pos(i, [3]int{})))
						if r > cutA {
							continue
						}
						k := k0 * math.Exp(-r/lambdaA)
						out.Springs = append(out.Springs, physics.Spring{From: i, To: j, Cell: append([]int(nil), n[:d]...), KLong: k, KTrans: k / 10})
					}
				}
			}
		}
	}
	return out
}

// lessCellZero reports 0 < n in the lexicographic order.
func lessCellZero(n [3]int) bool {
	for _, x := range n {
		if x != 0 {
			return x > 0
		}
	}
	return false
}

// SpringBlocks returns c with its springs written out as explicit
// force-constant blocks, as first-principles sets come: one block
// Φ(i; n j) = −(k∥ êêᵀ + k⊥(1 − êêᵀ)) per spring (ê the bond's direction
// at the sites' positions) and one on-site block per site, minus the sum
// of its bonds' blocks (the acoustic sum rule; a bond of a site with its
// own image counts at both ends) — the blocks Compile makes of the
// springs, so the two spellings have the same dynamical matrix.
// c must use eV/Å² and have no shells.
func SpringBlocks(c *physics.Crystal) *physics.Crystal {
	out := Clone(c)
	out.Springs = nil
	d := len(c.Lattice)
	var lat [3][3]float64
	copy(lat[:], c.Lattice)
	pos := func(i int, cell []int) [3]float64 {
		var r [3]float64
		for k := 0; k < d; k++ {
			f := c.Sites[i].Frac[k]
			if cell != nil {
				f += float64(cell[k])
			}
			r = lattice.Add(r, lattice.Scale(lat[k], f))
		}
		return r
	}
	self := make([][9]float64, len(c.Sites))
	for _, s := range c.Springs {
		r := lattice.Sub(pos(s.To, s.Cell), pos(s.From, nil))
		e := lattice.Scale(r, 1/lattice.Norm(r))
		phi := make([]float64, 9)
		for a := 0; a < 3; a++ {
			for b := 0; b < 3; b++ {
				ee, id := e[a]*e[b], 0.0
				if a == b {
					id = 1
				}
				phi[3*a+b] = -(s.KLong*ee + s.KTrans*(id-ee))
				self[s.From][3*a+b] -= phi[3*a+b]
				self[s.To][3*a+b] -= phi[3*a+b]
			}
		}
		out.Blocks = append(out.Blocks, physics.Block{From: s.From, To: s.To, Cell: append([]int(nil), s.Cell...), Phi: phi})
	}
	for i, s := range self {
		out.Blocks = append(out.Blocks, physics.Block{From: i, To: i, Cell: make([]int, d), Phi: append([]float64(nil), s[:]...)})
	}
	return out
}

// LowSymmetry is the benchmark crystal of the per-site DOS at size: the
// cubic-pair supercell of the given number of sites (SizedShape) with
// every site moved by up to 0.05 Å along each axis and every spring 5 %
// off (only the identity and time reversal remain), written as explicit
// blocks (SpringBlocks). Invented; the same seed gives the same crystal.
func LowSymmetry(t testing.TB, sites int) *physics.Crystal {
	t.Helper()
	rng := rand.New(rand.NewPCG(uint64(sites), 0x10b))
	c := SpringBlocks(Distorted(Sized(t, sites), rng, 0.05, 0.05))
	c.Name = fmt.Sprintf("low-symmetry cubic pair, %d sites", sites)
	return c
}

// WriteModelJSON writes c as a model file: the protobuf JSON of
// modegrid.v1.Crystal (field names as protojson writes them), which the
// CLI's --model reads. Floats keep every digit (encoding/json writes the
// shortest form that reads back exactly).
func WriteModelJSON(w io.Writer, c *physics.Crystal) error {
	type vec struct {
		X float64 `json:"x"`
		Y float64 `json:"y"`
		Z float64 `json:"z"`
	}
	type site struct {
		Label   string    `json:"label"`
		MassAmu float64   `json:"massAmu"`
		Frac    []float64 `json:"frac"`
	}
	type block struct {
		From int       `json:"fromSite"`
		To   int       `json:"toSite"`
		Cell []int     `json:"cell"`
		Phi  []float64 `json:"phi"`
	}
	if len(c.Springs) > 0 || len(c.Shells) > 0 || c.ForceUnit != physics.EVPerA2 {
		return fmt.Errorf("WriteModelJSON: only models of explicit blocks in eV/Å² are written")
	}
	f := struct {
		Name          string  `json:"name"`
		Lattice       []vec   `json:"lattice"`
		Polarizations int     `json:"polarizations"`
		Sites         []site  `json:"sites"`
		Blocks        []block `json:"blocks"`
	}{Name: c.Name, Polarizations: c.P()}
	for _, v := range c.Lattice {
		f.Lattice = append(f.Lattice, vec{v[0], v[1], v[2]})
	}
	for _, s := range c.Sites {
		f.Sites = append(f.Sites, site{s.Label, s.MassAmu, s.Frac})
	}
	for _, b := range c.Blocks {
		f.Blocks = append(f.Blocks, block{b.From, b.To, b.Cell, b.Phi})
	}
	enc := json.NewEncoder(w)
	return enc.Encode(f)
}
