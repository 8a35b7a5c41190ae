package physics

import "math"

// Mean-square displacements: the modes' tensor channels and their
// assembly into ⟨u uᵀ⟩ per site (B. T. M. Willis & A. W. Pryor, Thermal
// Vibrations in Crystallography, Cambridge 1975, ch. 4; Maradudin, Montroll
// & Weiss, Theory of Lattice Dynamics in the Harmonic Approximation, 1963):
//
//	⟨u_α u_β⟩_s = Σ_{q,k} w_q ħ/(2 m_s ω_qk) coth(ħω_qk/2kT) Re(e_sα e_sβ*),
//
// with coth(x/2) = 1 + 2n(x). The eigenvector phase convention drops out of
// e_sα e_sβ* (both components belong to the same site).

// msdUnitA2 is ħ/(2 m_u · 2π·1 THz) in Å²: ⟨u²⟩ of one mode of ν THz on a
// site of m amu at T = 0 is msdUnitA2/(m ν) times its eigenvector share.
var msdUnitA2 = ReducedPlanckJS / (2 * AtomicMassKg * 2 * math.Pi * 1e12) / (angstromM * angstromM)

// collectModes gathers the modes of g above the zero tolerance with their
// weights and, with msd, the tensor channels from the eigenvectors.
func collectModes(m *Model, g *GridModes, tol float64, msd bool) *modeSet {
	nm, ns, p := g.NModes, g.NSites, g.P
	npair := p * (p + 1) / 2
	set := &modeSet{nc: 1, p: p, nsites: ns}
	if msd {
		set.nc = 1 + ns*npair
		set.zero = make([]float64, set.nc-1)
	}
	count := 0
	for _, f := range g.FreqTHz {
		if f > tol {
			count++
		}
	}
	set.nu = make([]float64, 0, count)
	set.ch = make([]float64, 0, count*set.nc)
	for i, q := range g.Points {
		for k := 0; k < nm; k++ {
			f := g.FreqTHz[i*nm+k]
			if f <= tol {
				continue
			}
			set.nu = append(set.nu, f)
			set.ch = append(set.ch, q.Weight)
			if !msd {
				continue
			}
			vec := g.Eigvecs[(i*nm+k)*nm : (i*nm+k+1)*nm]
			for s := 0; s < ns; s++ {
				amp := q.Weight * msdUnitA2 / (m.MassAmu(s) * f)
				for a := 0; a < p; a++ {
					for b := a; b < p; b++ {
						ea, eb := vec[s*p+a], vec[s*p+b]
						v := amp * (real(ea)*real(eb) + imag(ea)*imag(eb))
						set.ch = append(set.ch, v)
					}
				}
			}
		}
	}
	if msd {
		for i := range set.nu {
			for c := 1; c < set.nc; c++ {
				set.zero[c-1] += set.ch[i*set.nc+c]
			}
		}
	}
	return set
}

// assembleMSD turns the thermal channel sums Σ A n into per-site tensors:
// ⟨u uᵀ⟩ = Σ A (1 + 2n).
func (s *modeSet) assembleMSD(thermal []float64) []SiteMSD {
	npair := s.p * (s.p + 1) / 2
	out := make([]SiteMSD, s.nsites)
	for site := range out {
		c := site * npair
		for a := 0; a < s.p; a++ {
			for b := a; b < s.p; b++ {
				v := s.zero[c] + 2*thermal[c]
				out[site].U[3*a+b] = v
				out[site].U[3*b+a] = v
				c++
			}
		}
		u := &out[site]
		u.UIso = (u.U[0] + u.U[4] + u.U[8]) / 3
		u.B = 8 * math.Pi * math.Pi * u.UIso
	}
	return out
}
