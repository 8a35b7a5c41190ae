// Three-vector helpers and the reciprocal lattice.

package lattice

import "math"

// Norm is the Euclidean length |v|.
func Norm(v [3]float64) float64 { return math.Sqrt(v[0]*v[0] + v[1]*v[1] + v[2]*v[2]) }

// Dot is the scalar product a·b.
func Dot(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }

// GramMeasure is the d-dimensional measure of the cell spanned by the
// vectors: length, area or volume, sqrt(det G) with G the Gram matrix.
func GramMeasure(vecs [][3]float64) float64 {
	d := len(vecs)
	var g [3][3]float64
	for i := 0; i < d; i++ {
		for j := 0; j < d; j++ {
			g[i][j] = Dot(vecs[i], vecs[j])
		}
	}
	var det float64
	switch d {
	case 1:
		det = g[0][0]
	case 2:
		det = g[0][0]*g[1][1] - g[0][1]*g[1][0]
	case 3:
		det = g[0][0]*(g[1][1]*g[2][2]-g[1][2]*g[2][1]) -
			g[0][1]*(g[1][0]*g[2][2]-g[1][2]*g[2][0]) +
			g[0][2]*(g[1][0]*g[2][1]-g[1][1]*g[2][0])
	}
	if det <= 0 {
		return 0
	}
	return math.Sqrt(det)
}

// Add is a + b.
func Add(a, b [3]float64) [3]float64 { return [3]float64{a[0] + b[0], a[1] + b[1], a[2] + b[2]} }

// Sub is a − b.
func Sub(a, b [3]float64) [3]float64 { return [3]float64{a[0] - b[0], a[1] - b[1], a[2] - b[2]} }

// Reciprocal returns reciprocal vectors b_k (rows) with b_k·a_l = 2π δ_kl,
// spanning the same subspace as the d lattice vectors.
func Reciprocal(a [3][3]float64, d int) [3][3]float64 {
	// b = 2π (A Aᵀ)⁻¹ A restricted to the d vectors: works for any d.
	var g [3][3]float64
	for i := 0; i < d; i++ {
		for j := 0; j < d; j++ {
			g[i][j] = Dot(a[i], a[j])
		}
	}
	gi := Invert(g, d)
	var b [3][3]float64
	for k := 0; k < d; k++ {
		for l := 0; l < d; l++ {
			for x := 0; x < 3; x++ {
				b[k][x] += 2 * math.Pi * gi[k][l] * a[l][x]
			}
		}
	}
	return b
}

// Invert inverts the top-left d×d block of g (d ≤ 3, non-singular).
func Invert(g [3][3]float64, d int) [3][3]float64 {
	var r [3][3]float64
	switch d {
	case 1:
		r[0][0] = 1 / g[0][0]
	case 2:
		det := g[0][0]*g[1][1] - g[0][1]*g[1][0]
		r[0][0], r[0][1] = g[1][1]/det, -g[0][1]/det
		r[1][0], r[1][1] = -g[1][0]/det, g[0][0]/det
	case 3:
		det := g[0][0]*(g[1][1]*g[2][2]-g[1][2]*g[2][1]) -
			g[0][1]*(g[1][0]*g[2][2]-g[1][2]*g[2][0]) +
			g[0][2]*(g[1][0]*g[2][1]-g[1][1]*g[2][0])
		for i := 0; i < 3; i++ {
			for j := 0; j < 3; j++ {
				i1, i2 := (j+1)%3, (j+2)%3
				j1, j2 := (i+1)%3, (i+2)%3
				r[i][j] = (g[i1][j1]*g[i2][j2] - g[i1][j2]*g[i2][j1]) / det
			}
		}
	}
	return r
}

// Scale is s·v.
func Scale(v [3]float64, s float64) [3]float64 { return [3]float64{v[0] * s, v[1] * s, v[2] * s} }

// Cross is the vector product a × b.
func Cross(a, b [3]float64) [3]float64 {
	return [3]float64{a[1]*b[2] - a[2]*b[1], a[2]*b[0] - a[0]*b[2], a[0]*b[1] - a[1]*b[0]}
}
