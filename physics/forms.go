// The long-wave energy forms of a compiled model, exported for packages
// that differentiate the elastic limit (physics/fit).

package physics

import (
	"math"

	"github.com/materials-lab/modegrid/physics/lattice"
)

// LongWaveForms are the raw (not mass-weighted) force-constant moments
// that define the long-wavelength limit of the acoustic branches (header
// of elastic.go, method of long waves, Born & Huang ch. V). For a unit
// direction u, a uniform displacement U (p numbers) and internal
// displacements w (p per site), the energy per cell of a long wave of
// wavenumber κ is κ² times
//
//	E(U, w) = Σ_αβ u_α u_β Uᵀ G2_αβ U + wᵀ Phi0 w + 2 Σ_α u_α wᵀ Y_α U,
//
// with the position phase convention (bond b = R_n + x_j − x_i):
//
//	Phi0[(i,a),(j,c)]  = Σ_n Φ_ac(0i; nj)               eV/Å²
//	Y[(i,a),(α,c)]     = Σ_{j,n} b_α Φ_ac(0i; nj)        eV/Å
//	G2[(α,a),(β,c)]    = −½ Σ_{i,j,n} b_α b_β Φ_ac(0i; nj)  eV
//
// Indices: site i, Cartesian axis α (all three), polarization a, c (the
// first p axes). Phi0 is (sites·p)² and symmetric, Y is (sites·p) × 3p, G2
// is 3p × 3p (not symmetrised), all row-major. Every entry is linear in
// the force constants, so the forms of a model whose force constants are
// a linear combination of others are the same combination of theirs.
// SoundVelocities relaxes w with site 0 held (which removes the rigid
// translations) and divides by the cell's mass; a caller doing the same
// with these forms gets its speeds.
type LongWaveForms struct {
	P, Sites int
	Phi0     []float64
	Y        []float64
	G2       []float64
	// YScale is Σ |b| |Φ_ac| over every term and component (eV/Å): the
	// scale of Y's rounding, against which the first-order term Σ_i Y_i
	// (zero unless explicit blocks have antisymmetric parts) is judged.
	YScale float64
}

// LongWaveForms returns the model's long-wave energy forms, built from the
// compiled force constants (O(interactions); the caller owns the slices).
func (m *Model) LongWaveForms() *LongWaveForms {
	p, ns := m.p, m.nsites
	n, np := p*ns, 3*p
	f := &LongWaveForms{P: p, Sites: ns, Phi0: make([]float64, n*n), Y: make([]float64, n*np), G2: make([]float64, np*np)}
	for _, t := range m.terms {
		w := sqrtMass(m, t.i, t.j)
		b := lattice.Sub(lattice.Add(m.pos[t.j], m.latticeVec(t.n)), m.pos[t.i])
		for a := 0; a < p; a++ {
			for c := 0; c < p; c++ {
				phi := t.phi[3*a+c] * w // raw Φ, eV/Å²
				f.Phi0[(t.i*p+a)*n+t.j*p+c] += phi
				f.YScale += math.Abs(phi) * lattice.Norm(b)
				for al := 0; al < 3; al++ {
					f.Y[(t.i*p+a)*np+al*p+c] += b[al] * phi
					for be := 0; be < 3; be++ {
						f.G2[(al*p+a)*np+be*p+c] -= 0.5 * b[al] * b[be] * phi
					}
				}
			}
		}
	}
	return f
}

// sqrtMass is sqrt(m_i m_j), amu: the factor that undoes the mass
// weighting of a compiled term.
func sqrtMass(m *Model, i, j int) float64 {
	return math.Sqrt(m.massAmu[i] * m.massAmu[j])
}
