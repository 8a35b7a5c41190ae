// Tetrahedron geometry: how a regular q-point grid is cut into simplices.
//
// Sources: O. Jepsen & O. K. Andersen, Solid State Commun. 9, 1763 (1971);
// P. E. Blöchl, O. Jepsen & O. K. Andersen, Phys. Rev. B 49, 16223 (1994).

package mesh

import "math"

// Simplices is the cutting of every grid cell into simplices of d+1
// corners.
type Simplices struct {
	Dim     int
	Corners [][4]uint8 // corner bit patterns (bit k = +1 step along axis k); d+1 used
	Weight  float64    // zone fraction of one simplex: 1/(d!·N)
}

// GridSimplices cuts each cell of the grid spec (mesh N along the d lattice
// directions) into d! simplices sharing the cell's shortest main diagonal,
// measured in Cartesian reciprocal space with the rows of recip as the
// reciprocal vectors b_k (Blöchl, Jepsen & Andersen 1994, §II: the shortest
// diagonal keeps the simplices compact and the interpolation error
// smallest).
func GridSimplices(recip [3][3]float64, mesh [3]int, dim int) Simplices {
	n := mesh[0] * mesh[1] * mesh[2]
	set := Simplices{Dim: dim}
	switch dim {
	case 1:
		set.Corners = [][4]uint8{{0, 1}}
		set.Weight = 1 / float64(n)
		return set
	case 2:
		s := uint8(ShortestDiagonal(recip, mesh, 2))
		for _, perm := range [][2]uint8{{0, 1}, {1, 0}} {
			v1 := s ^ (1 << perm[0])
			set.Corners = append(set.Corners, [4]uint8{s, v1, s ^ 3})
		}
		set.Weight = 1 / (2 * float64(n))
		return set
	}
	s := uint8(ShortestDiagonal(recip, mesh, 3))
	for _, perm := range [][3]uint8{{0, 1, 2}, {0, 2, 1}, {1, 0, 2}, {1, 2, 0}, {2, 0, 1}, {2, 1, 0}} {
		v1 := s ^ (1 << perm[0])
		v2 := v1 ^ (1 << perm[1])
		set.Corners = append(set.Corners, [4]uint8{s, v1, v2, s ^ 7})
	}
	set.Weight = 1 / (6 * float64(n))
	return set
}

// ShortestDiagonal returns the start corner s (bit pattern, s < 2^(d−1)) of
// the shortest main diagonal s → s XOR (2^d − 1) of a grid cell with edges
// b_k/N_k. Ties (within 1e-9 relative) go to the smallest s, so symmetric
// lattices cut the same way on every machine.
func ShortestDiagonal(recip [3][3]float64, mesh [3]int, dim int) int {
	best, bestLen := 0, math.Inf(1)
	for s := 0; s < 1<<(dim-1); s++ {
		var v [3]float64
		for k := 0; k < dim; k++ {
			sign := 1.0
			if s>>k&1 == 1 {
				sign = -1
			}
			for a := 0; a < 3; a++ {
				v[a] += sign * recip[k][a] / float64(mesh[k])
			}
		}
		l := v[0]*v[0] + v[1]*v[1] + v[2]*v[2]
		if l < bestLen*(1-1e-9) {
			best, bestLen = s, l
		}
	}
	return best
}

// CornerIndex is the grid-order index of the corner with bit pattern bits of
// the cell whose lowest corner is (a, b, c), wrapping periodically.
func CornerIndex(mesh [3]int, a, b, c int, bits uint8) int {
	a += int(bits & 1)
	b += int(bits >> 1 & 1)
	c += int(bits >> 2 & 1)
	if a == mesh[0] {
		a = 0
	}
	if b == mesh[1] {
		b = 0
	}
	if c == mesh[2] {
		c = 0
	}
	return (a*mesh[1]+b)*mesh[2] + c
}
