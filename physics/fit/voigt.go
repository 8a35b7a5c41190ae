// Elastic constants from the long-wave tensor: the Christoffel relation
// inverted for a tensor of full Voigt symmetry.

package fit

import (
	"sync"

	"gonum.org/v1/gonum/mat"
)

// voigt maps a Cartesian pair (i, j) to its Voigt index 0..5 (xx, yy, zz,
// yz, xz, xy).
var voigt = [3][3]int{{0, 5, 4}, {5, 1, 3}, {4, 3, 2}}

// voigtIndex is the index of C_IJ (I ≤ J, 0-based Voigt indices) among
// the 21 independent constants, in row order C11, C12, …, C16, C22, …, C66.
func voigtIndex(i, j int) int {
	if j < i {
		i, j = j, i
	}
	return i*6 - i*(i-1)/2 + (j - i)
}

// christoffelMap is the 81 × 21 matrix A taking the 21 constants of an
// elastic tensor of full Voigt symmetry to the symmetrised Christoffel
// coefficients S[a,c,α,β] = (c_{aαcβ} + c_{aβcα})/2, with Γ_ac(u) =
// Σ_αβ S[a,c,α,β] u_α u_β the Christoffel matrix (ρv² are its
// eigenvalues; M. J. P. Musgrave, Crystal Acoustics, 1970, ch. 3). Its
// pseudo-inverse recovers the constants from a Christoffel tensor; A has
// full column rank 21 (the acoustic tensor determines a fully symmetric
// elastic tensor; TestChristoffelMapRank checks the rank).
func christoffelMap() *mat.Dense {
	a := mat.NewDense(81, 21, nil)
	for ac := 0; ac < 9; ac++ {
		i, k := ac/3, ac%3
		for ab := 0; ab < 9; ab++ {
			al, be := ab/3, ab%3
			row := ac*9 + ab
			x := voigtIndex(voigt[i][al], voigt[k][be])
			y := voigtIndex(voigt[i][be], voigt[k][al])
			a.Set(row, x, a.At(row, x)+0.5)
			a.Set(row, y, a.At(row, y)+0.5)
		}
	}
	return a
}

var christoffelPinv = sync.OnceValue(func() *mat.Dense {
	a := christoffelMap()
	var ata, inv, out mat.Dense
	ata.Mul(a.T(), a)
	if err := inv.Inverse(&ata); err != nil {
		panic("fit: the Christoffel map is singular: " + err.Error())
	}
	out.Mul(&inv, a.T())
	return &out
})

// voigtFromG returns the 21 elastic constants (times the cell volume: eV)
// of the long-wave tensor G (9 × 9 for p = 3, row (α,a), column (β,c)):
// the least-squares tensor of full Voigt symmetry whose Christoffel
// matrices are C(u) = Σ u_α u_β G_αβ. G is first symmetrised in every way
// that leaves C(u) unchanged (α ↔ β, a ↔ c).
func voigtFromG(g []float64) [21]float64 {
	var s [81]float64
	at := func(al, a, be, c int) float64 { return g[(al*3+a)*9+be*3+c] }
	for a := 0; a < 3; a++ {
		for c := 0; c < 3; c++ {
			for al := 0; al < 3; al++ {
				for be := 0; be < 3; be++ {
					s[(a*3+c)*9+al*3+be] = 0.25 * (at(al, a, be, c) + at(be, a, al, c) + at(al, c, be, a) + at(be, c, al, a))
				}
			}
		}
	}
	pinv := christoffelPinv()
	var out [21]float64
	for k := range out {
		var x float64
		for r, v := range s {
			x += pinv.At(k, r) * v
		}
		out[k] = x
	}
	return out
}
