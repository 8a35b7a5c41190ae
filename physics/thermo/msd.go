package thermo

import (
	"context"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/spectra"
)

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
var msdUnitA2 = physics.ReducedPlanckJS / (2 * physics.AtomicMassKg * 2 * math.Pi * 1e12) / (physics.AngstromM * physics.AngstromM)

// collectModes gathers the modes of g that the thermal sums keep (see
// gammaZeroAcoustic) with their weights and, with msd, the tensor channels
// from the eigenvectors. It also returns the number and total weight of
// the modes left out that are not imaginary: Γ's acoustic modes, exact
// zeros (negative frequencies are imaginary). It polls ctx per q-point
// and returns ctx.Err() if ctx ends first.
func collectModes(ctx context.Context, m *physics.Model, g *physics.GridModes, st spectra.Spectrum, msd bool) (set *modeSet, zeroWeight float64, zeros int, err error) {
	nm, ns, p := g.NModes, g.NSites, g.P
	npair := p * (p + 1) / 2
	set = &modeSet{nc: 1, p: p, nsites: ns}
	if msd {
		set.nc = 1 + ns*npair
		set.zero = make([]float64, set.nc-1)
	}
	set.nu = make([]float64, 0, len(g.FreqTHz))
	set.ch = make([]float64, 0, len(g.FreqTHz)*set.nc)
	for i, q := range g.Points {
		if (msd || i%pollEvery == 0) && ctx.Err() != nil {
			return nil, 0, 0, ctx.Err()
		}
		f := g.FreqTHz[i*nm : (i+1)*nm]
		var ac uint64 // Γ's acoustic modes, zero to rounding
		if physics.IsGamma(q.Q) {
			ac = gammaZeroAcoustic(f, p, st)
		}
		for k, nu := range f {
			if zero := k < 64 && ac>>k&1 == 1; zero || !(nu > 0) {
				if zero || nu == 0 { // not imaginary (negative is: doc.go, Zero and imaginary modes)
					zeroWeight += q.Weight
					zeros++
				}
				continue
			}
			set.nu = append(set.nu, nu)
			set.ch = append(set.ch, q.Weight)
			if !msd {
				continue
			}
			vec := g.Eigvecs[(i*nm+k)*nm : (i*nm+k+1)*nm]
			for s := 0; s < ns; s++ {
				amp := q.Weight * msdUnitA2 / (m.MassAmu(s) * nu)
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
	return set, zeroWeight, zeros, nil
}

// gammaZeroAcoustic returns the bit set of the acoustic modes among the
// modes f at Γ (the p of smallest |ν|, of the first 64) that are zero to
// rounding: |ν| ≤ the zero tolerance, or negative (at Γ they are never
// counted imaginary, see spectra.Stats). The thermal sums leave out these
// and modes of zero or negative frequency, and nothing else: a relative cut
// on every point would drop the whole acoustic branch of a model with a
// large stiffness contrast (all its acoustic frequencies below 1e-6 of the
// optical ones) and the lowest modes of any fine grid, which the DOS keeps.
func gammaZeroAcoustic(f []float64, p int, st spectra.Spectrum) uint64 {
	ac := spectra.GammaAcoustic(f, p)
	for k := 0; k < len(f) && k < 64; k++ {
		if ac>>k&1 == 1 && f[k] > st.ZeroTol {
			ac &^= 1 << k
		}
	}
	return ac
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

// msdDivergence says whether the mean-square displacements of a grid are
// those of a crystal whose ⟨u²⟩ is infinite. In d dimensions the acoustic
// modes near Γ (ω = v|q|, density ∝ q^(d−1) dq) give
//
//	zero point: ∫ q^(d−1) dq / ω ∝ ∫ q^(d−2) dq,   thermal: kT ∫ q^(d−1) dq / ω² ∝ ∫ q^(d−3) dq,
//
// so the zero-point part diverges (logarithmically) in 1D, the thermal part
// in 1D (∝ q_min⁻¹ ∝ N) and 2D (∝ ln N) — the absence of long-range
// order in low dimensions (R. Peierls, Helv. Phys. Acta 7, 81 (1934);
// N. D. Mermin & H. Wagner, Phys. Rev. Lett. 17, 1133 (1966); N. D.
// Mermin, Phys. Rev. 176, 250 (1968)). The grid sums leave out Γ and are
// finite, but grow with the grid. Only a model whose acoustic modes are
// zero at Γ (translation invariance) has this divergence; a finite crystal
// is never flagged (its sums are its own ⟨u²⟩).
type msdDivergence struct {
	dim      int
	acoustic bool
	finite   bool
}

// msdDivergenceOf sets up the divergence check for model m on the grid g.
func msdDivergenceOf(m *physics.Model, g *physics.GridModes, st spectra.Spectrum) msdDivergence {
	if m.Dim() == 3 || g.Spec.Finite {
		return msdDivergence{dim: m.Dim(), finite: g.Spec.Finite} // never divergent
	}
	f := m.FrequenciesTHz([3]float64{})
	return msdDivergence{dim: m.Dim(), acoustic: gammaZeroAcoustic(f, m.Polarizations(), st) != 0, finite: g.Spec.Finite}
}

// reason returns why ⟨u²⟩ diverges at temperature tempK (0 for T = 0),
// or "" when it does not.
func (d msdDivergence) reason(tempK float64) string {
	if d.finite || !d.acoustic {
		return ""
	}
	switch {
	case d.dim == 1 && tempK > 0:
		return "one-dimensional crystal: thermal ⟨u²⟩ diverges (Peierls); the grid sum grows like N, the number of q-points"
	case d.dim == 1:
		return "one-dimensional crystal: zero-point ⟨u²⟩ diverges; the grid sum grows like ln N, N the number of q-points"
	case d.dim == 2 && tempK > 0:
		return "two-dimensional crystal at T > 0: ⟨u²⟩ diverges (Mermin–Wagner); the grid sum grows like ln N, N the number of q-points"
	}
	return ""
}

// mark flags the sites' tensors at tempK as divergent where they are.
func (d msdDivergence) mark(sites []SiteMSD, tempK float64) {
	r := d.reason(tempK)
	if r == "" {
		return
	}
	for i := range sites {
		sites[i].Divergent, sites[i].DivergentReason = true, r
	}
}
