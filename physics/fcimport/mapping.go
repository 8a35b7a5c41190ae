package fcimport

import (
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
)

// cart returns Σ_c f_c a_c, Cartesian Å.
func (g *geometry) cart(f []float64) [3]float64 {
	var x [3]float64
	for c := 0; c < g.d; c++ {
		for k := 0; k < 3; k++ {
			x[k] += f[c] * g.lat[c][k]
		}
	}
	return x
}

// primFrac returns the atom's fractional coordinates in the primitive
// vectors and the length (Å) of its part outside their span.
func (g *geometry) primFrac(pos []float64, fractional bool) ([]float64, float64, bool) {
	f := make([]float64, g.d)
	if fractional {
		if len(pos) != g.d {
			return nil, 0, false
		}
		for c := 0; c < g.d; c++ {
			for r := 0; r < g.d; r++ {
				f[c] += pos[r] * float64(g.m[r*g.d+c])
			}
		}
		return f, 0, true
	}
	if len(pos) != 3 {
		return nil, 0, false
	}
	// Least squares: (L Lᵀ) f = L x, L the d×3 matrix of the vectors.
	gm := make([]float64, g.d*g.d)
	rhs := make([]float64, g.d)
	for a := 0; a < g.d; a++ {
		for b := 0; b < g.d; b++ {
			gm[a*g.d+b] = dot(g.lat[a], g.lat[b])
		}
		rhs[a] = dot(g.lat[a], [3]float64{pos[0], pos[1], pos[2]})
	}
	f = solveSmall(gm, rhs, g.d)
	x := g.cart(f)
	var perp float64
	for k := 0; k < 3; k++ {
		perp += (pos[k] - x[k]) * (pos[k] - x[k])
	}
	return f, math.Sqrt(perp), true
}

func dot(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }

// solveSmall solves the d×d system a x = b by Gaussian elimination with
// partial pivoting (the Gram matrix of a validated lattice is well
// conditioned).
func solveSmall(a, b []float64, d int) []float64 {
	a = append([]float64(nil), a...)
	b = append([]float64(nil), b...)
	for c := 0; c < d; c++ {
		p := c
		for r := c + 1; r < d; r++ {
			if math.Abs(a[r*d+c]) > math.Abs(a[p*d+c]) {
				p = r
			}
		}
		for k := 0; k < d; k++ {
			a[c*d+k], a[p*d+k] = a[p*d+k], a[c*d+k]
		}
		b[c], b[p] = b[p], b[c]
		for r := c + 1; r < d; r++ {
			f := a[r*d+c] / a[c*d+c]
			for k := c; k < d; k++ {
				a[r*d+k] -= f * a[c*d+k]
			}
			b[r] -= f * b[c]
		}
	}
	x := make([]float64, d)
	for r := d - 1; r >= 0; r-- {
		s := b[r]
		for k := r + 1; k < d; k++ {
			s -= a[r*d+k] * x[k]
		}
		x[r] = s / a[r*d+r]
	}
	return x
}

// reduce returns the representative of the cell offset n modulo the
// supercell lattice (its supercell-fractional coordinates in [0, 1)).
func (g *geometry) reduce(n [3]int) [3]int {
	out := n
	for r := 0; r < g.d; r++ {
		var m float64
		for c := 0; c < g.d; c++ {
			m += float64(n[c]) * g.minv[c*g.d+r]
		}
		k := int(math.Floor(m + 1e-9))
		for c := 0; c < g.d; c++ {
			out[c] -= k * g.m[r*g.d+c]
		}
	}
	return out
}

// mapAtoms maps every atom to its site and reduced cell; it lists every
// atom it cannot map and every pair of atoms on the same place at once.
func (g *geometry) mapAtoms(s *Set) ([]atomMap, error) {
	var vs physics.Violations
	maps := make([]atomMap, len(s.Atoms))
	seen := map[atomMap]int{}
	for i, pos := range s.Atoms {
		field := fmt.Sprintf("supercell_fc.atoms[%d]", i)
		f, perp, ok := g.primFrac(pos, s.Fractional)
		if !ok {
			vs.Add(field, "needs %d coordinates, got %d", map[bool]int{true: g.d, false: 3}[s.Fractional], len(pos))
			continue
		}
		am, dist := g.nearestSite(f, perp)
		if dist > g.tol {
			vs.Add(field, "is %.3g Å from the nearest site (site %d), beyond the tolerance %g Å", dist, am.site, g.tol)
			continue
		}
		if j, dup := seen[am]; dup {
			vs.Add(field, "maps to the same site %d and cell as atoms[%d]", am.site, j)
			continue
		}
		seen[am] = i
		maps[i] = am
	}
	for i, a := range s.PrimitiveAtoms {
		if vs.Len() == 0 && maps[a].site != i {
			vs.Add(fmt.Sprintf("supercell_fc.primitive_atoms[%d]", i), "atom %d is an image of site %d, not of site %d", a, maps[a].site, i)
		}
	}
	return maps, vs.Err()
}

// nearestSite returns the site and reduced cell nearest to the primitive
// fractional position f, and its distance in Å.
func (g *geometry) nearestSite(f []float64, perp float64) (atomMap, float64) {
	best, bestD := atomMap{}, math.Inf(1)
	delta := make([]float64, g.d)
	for s, sf := range g.frac {
		var n [3]int
		for c := 0; c < g.d; c++ {
			n[c] = int(math.Round(f[c] - sf[c]))
			delta[c] = f[c] - sf[c] - float64(n[c])
		}
		x := g.cart(delta)
		dist := math.Sqrt(dot(x, x) + perp*perp)
		if dist < bestD {
			best, bestD = atomMap{site: s, cell: g.reduce(n)}, dist
		}
	}
	return best, bestD
}
