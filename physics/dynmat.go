package physics

import (
	"math"
	"math/cmplx"
)

// DynamicalMatrix writes D(q) for q in fractional reciprocal coordinates into
// out (row-major N×N, N = Modes(), eV/Å²/amu), allocating when out is too
// short, and returns it. D is Hermitian by construction: every directed
// term (i, j, n) is stored with its transpose (j, i, −n).
func (m *Model) DynamicalMatrix(q [3]float64, out []complex128) []complex128 {
	nm := m.Modes()
	if cap(out) < nm*nm {
		out = make([]complex128, nm*nm)
	}
	out = out[:nm*nm]
	clear(out)
	p := m.p
	for _, t := range m.terms {
		arg := 2 * math.Pi * (q[0]*float64(t.n[0]) + q[1]*float64(t.n[1]) + q[2]*float64(t.n[2]))
		ph := cmplx.Rect(1, arg)
		for a := 0; a < p; a++ {
			row := (t.i*p + a) * nm
			for b := 0; b < p; b++ {
				out[row+t.j*p+b] += complex(t.phi[3*a+b], 0) * ph
			}
		}
	}
	return out
}
