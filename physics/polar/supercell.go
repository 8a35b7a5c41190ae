// The dipole–dipole part of a supercell's force constants, to be taken out
// before the supercell is folded onto the primitive cell.

package polar

import (
	"context"
	"fmt"
	"math"
	"math/cmplx"

	"github.com/materials-lab/modegrid/physics"
)

// SupercellPart returns the dipole–dipole part of the force constants of
// the supercell of c given by the d×d integer matrix (rows: the supercell
// vectors in primitive lattice coordinates), as a function of the site s
// in cell 0, the site t and the cell offset r of t (any cell: the part is
// periodic with the supercell), in c's force unit.
//
// A supercell calculation (finite displacements with periodic boundary
// conditions) holds, for every pair, the sum over the supercell's periodic
// images, and no macroscopic field: at its commensurate wavevectors q (the
// |det M| points with q·M_r integer) it is exactly D(q) of the primitive
// cell, with the analytic part only at Γ. The part returned is
//
//	Φ_dd(s, 0; t, n) = (1/N) Σ_{q commensurate} C_dd(q)_{st} e^{−2πi q·n},
//
// C_dd the raw (not mass-weighted) dipole–dipole term of the primitive
// cell, so that the supercell data minus it, folded (physics/fcimport),
// plus C_dd(q) again at every q (the compiled polar model) gives back the
// data's D(q) at every commensurate q, while between them the long-range
// part is the Ewald sum's instead of a folded, truncated one.
//
// The charges are made neutral first when enforce is set, as the compiled
// model will use them. A crystal whose polar data are invalid returns the
// compile's *physics.ValidationError; it returns ctx.Err() when ctx ends
// first.
func SupercellPart(ctx context.Context, c *physics.Crystal, matrix []int, enforce bool) (func(s, t int, r [3]int) [9]float64, error) {
	if len(matrix) != 9 || len(c.Lattice) != 3 {
		return nil, fmt.Errorf("polar: a supercell of a polar crystal needs a 3×3 matrix and a 3D crystal")
	}
	bare := &physics.Crystal{Name: c.Name, Lattice: c.Lattice, Polarizations: c.Polarizations, Sites: c.Sites, EpsilonInf: c.EpsilonInf}
	m, err := physics.Compile(ctx, bare, physics.Options{LongRange: Builder(), EnforceChargeNeutrality: enforce})
	if err != nil {
		return nil, err
	}
	qs, err := commensurate(matrix)
	if err != nil {
		return nil, err
	}
	n := m.Sites()
	nm := 3 * n
	unit := 1.0
	if c.ForceUnit == physics.NPerM {
		unit = physics.EVPerA2InNPerM
	}
	raw := make([][]complex128, len(qs)) // full raw C(q), eV/Å² in the crystal's unit
	t := m.LongRangeTerm()
	for x, q := range qs {
		a := make([]complex128, nm*nm)
		if !t.AddTo(q, [3]float64{}, a, func() bool { return ctx.Err() != nil }) {
			return nil, ctx.Err()
		}
		for r := 0; r < nm; r++ {
			for col := 0; col <= r; col++ {
				f := complex(math.Sqrt(m.MassAmu(r/3)*m.MassAmu(col/3))*unit, 0)
				a[r*nm+col] *= f
				a[col*nm+r] = cmplx.Conj(a[r*nm+col])
			}
		}
		raw[x] = a
	}
	type memoKey struct {
		s, t int
		r    [3]int
	}
	memo := map[memoKey][9]float64{}
	inv := 1 / float64(len(qs))
	return func(s, tt int, r [3]int) [9]float64 {
		k := memoKey{s, tt, r}
		if b, ok := memo[k]; ok {
			return b
		}
		var b [9]float64
		for x, q := range qs {
			th := -2 * math.Pi * (q[0]*float64(r[0]) + q[1]*float64(r[1]) + q[2]*float64(r[2]))
			ph := cmplx.Rect(inv, th)
			for al := 0; al < 3; al++ {
				for be := 0; be < 3; be++ {
					b[3*al+be] += real(raw[x][(3*s+al)*nm+3*tt+be] * ph)
				}
			}
		}
		memo[k] = b
		return b
	}, nil
}

// commensurate lists the |det M| wavevectors (fractional, in [0, 1)) of
// the primitive zone that the supercell M resolves: the group generated
// modulo 1 by the columns of M⁻¹ (q = M⁻¹k, k integer, makes q·M_r = k_r).
func commensurate(m []int) ([][3]float64, error) {
	det := m[0]*(m[4]*m[8]-m[5]*m[7]) - m[1]*(m[3]*m[8]-m[5]*m[6]) + m[2]*(m[3]*m[7]-m[4]*m[6])
	if det == 0 {
		return nil, fmt.Errorf("polar: the supercell matrix is singular")
	}
	cof := func(r, c int) int {
		r1, r2, c1, c2 := (r+1)%3, (r+2)%3, (c+1)%3, (c+2)%3
		return m[3*r1+c1]*m[3*r2+c2] - m[3*r1+c2]*m[3*r2+c1]
	}
	var gens [3][3]float64 // column k of M⁻¹ = cof(k, ·)/det
	for k := 0; k < 3; k++ {
		for c := 0; c < 3; c++ {
			gens[k][c] = float64(cof(k, c)) / float64(det)
		}
	}
	canon := func(q [3]float64) [3]float64 {
		for c := range q {
			q[c] -= math.Floor(q[c])
			if q[c] > 1-1e-9 {
				q[c] = 0
			}
		}
		return q
	}
	key := func(q [3]float64) [3]int64 {
		var k [3]int64
		for c := range q {
			k[c] = int64(math.Round(q[c] * float64(abs3(det)) * 4))
		}
		return k
	}
	seen := map[[3]int64]bool{{}: true}
	out := [][3]float64{{}}
	for head := 0; head < len(out); head++ {
		for _, g := range gens {
			q := canon([3]float64{out[head][0] + g[0], out[head][1] + g[1], out[head][2] + g[2]})
			if k := key(q); !seen[k] {
				seen[k] = true
				out = append(out, q)
			}
		}
	}
	if len(out) != abs3(det) {
		return nil, fmt.Errorf("polar: found %d commensurate wavevectors for a supercell of %d cells", len(out), abs3(det))
	}
	return out, nil
}

func abs3(x int) int {
	if x < 0 {
		return -x
	}
	return x
}
