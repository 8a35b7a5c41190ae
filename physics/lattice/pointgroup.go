// The lattice's point group: integer rotations preserving the metric.

package lattice

import "math"

// PointGroup returns the integer lattice automorphisms R with entries in
// {−1, 0, 1} — enough for a reduced basis — that preserve the metric of
// the first d rows of lat within the length tolerance tolA (Å), the rest
// of each 3×3 matrix being the identity. R acts on fractional (lattice)
// coordinates. The order is that of an odometer over the d² entries
// (first entry fastest, −1, 0, 1), so it is the same on every call; the
// identity is among them but not necessarily first.
//
// The metric test is Rᵀ G R = G on the d×d block, entry by entry within
// MetricTol(lat, d, tolA): the bound of the change of those entries when
// every lattice vector of an exactly symmetric lattice moves by up to
// tolA (see MetricTol), plus 1e-8 of the largest |G_ij| for rounding.
func PointGroup(lat [3][3]float64, d int, tolA float64) [][3][3]int {
	var g [3][3]float64
	scale := 0.0
	for i := 0; i < d; i++ {
		for j := 0; j < d; j++ {
			g[i][j] = Dot(lat[i], lat[j])
			scale = math.Max(scale, math.Abs(g[i][j]))
		}
	}
	tol := MetricTol(lat, d, tolA)
	for i := 0; i < d; i++ {
		for j := 0; j < d; j++ {
			tol[i][j] += 1e-8 * scale
		}
	}
	n := d * d
	total := 1
	for k := 0; k < n; k++ {
		total *= 3
	}
	var out [][3][3]int
	for code := 0; code < total; code++ {
		var r [3][3]int
		c := code
		for k := 0; k < n; k++ {
			r[k/d][k%d] = c%3 - 1
			c /= 3
		}
		for k := d; k < 3; k++ {
			r[k][k] = 1
		}
		if metricPreserved(r, g, d, &tol) {
			out = append(out, r)
		}
	}
	return out
}

// Identity is the 3×3 integer identity.
func Identity() [3][3]int { return [3][3]int{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}} }

// MetricTol is the tolerance (Å²) on each entry of Rᵀ G R − G when the
// lattice vectors are known to tolA (Å): tol_ij = (1+d)·tolA·(|a_i|+|a_j|).
// Derivation: if every a_k is within δ of an exactly symmetric lattice,
// G_ij = a_i·a_j moves by at most δ(|a_i|+|a_j|) to first order; the
// rotated vectors b_i = Σ_k R_ki a_k (entries of R in {−1, 0, 1}, at most
// d non-zero per column) move by at most dδ and have the lengths of a_i,
// so (RᵀGR)_ij = b_i·b_j moves by at most dδ(|a_i|+|a_j|); the two bounds
// add to (1+d)δ(|a_i|+|a_j|).
func MetricTol(lat [3][3]float64, d int, tolA float64) [3][3]float64 {
	var tol [3][3]float64
	for i := 0; i < d; i++ {
		for j := 0; j < d; j++ {
			tol[i][j] = float64(1+d) * tolA * (Norm(lat[i]) + Norm(lat[j]))
		}
	}
	return tol
}

// metricPreserved reports Rᵀ G R = G on the d×d block, entry by entry
// within tol.
func metricPreserved(r [3][3]int, g [3][3]float64, d int, tol *[3][3]float64) bool {
	for i := 0; i < d; i++ {
		for j := 0; j < d; j++ {
			var s float64
			for k := 0; k < d; k++ {
				for l := 0; l < d; l++ {
					s += float64(r[k][i]) * g[k][l] * float64(r[l][j])
				}
			}
			if math.Abs(s-g[i][j]) > tol[i][j] {
				return false
			}
		}
	}
	return true
}

// InvTransposeInt returns R⁻ᵀ for a unimodular integer matrix (d ≤ 3),
// through the adjugate: R⁻¹ = adj(R)/det R with det R = ±1.
func InvTransposeInt(r [3][3]int) [3][3]int {
	var f [3][3]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			f[i][j] = float64(r[i][j])
		}
	}
	inv := Invert(f, 3)
	var out [3][3]int
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			out[i][j] = int(math.Round(inv[j][i]))
		}
	}
	return out
}
