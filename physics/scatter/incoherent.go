package scatter

import (
	"context"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// siteDOS is every site's projected density of states on bins of width
// HMeV centred at EMeV[i] (meV): G[j][i] states per cell per meV of site j,
// each site's integrating to p (the polarisations).
type siteDOS struct {
	EMeV []float64
	G    [][]float64
	HMeV float64
}

// MaxIncoherentBins bounds the DOS bins of the incoherent term.
const MaxIncoherentBins = MaxAxisSamples

// incoherentBinning is the DOS binning of the incoherent term (meV): bins
// of the axis step from 0 to the larger of |Min| and |Max| plus the reach
// of a line's Gaussian beyond the window (gaussCut σ at the window's
// edge), at most MaxIncoherentBins of them (wider bins then).
func (g grid) incoherentBinning() (hMeV, extentMeV float64) {
	reach := gaussCut * fwhmToSigma * max(g.res.fwhmAt(g.lo, g.lo, g.hi), g.res.fwhmAt(g.hi, g.lo, g.hi))
	extent := max(math.Abs(g.lo), math.Abs(g.hi)) + reach
	h := max(g.step, extent/MaxIncoherentBins)
	return h * g.mevPer, extent * g.mevPer
}

// IncoherentBins bounds the DOS bins of the incoherent term of a powder
// map on axis a with resolution r (the estimators' count; 0 for an axis
// the checks refuse). A window chosen from the modes has at most
// DefaultAxisSamples + 8: its bins end at the highest mode, 1.15 times
// below the window's end.
func IncoherentBins(a Axis, r Resolution) int {
	if a.Min == 0 && a.Max == 0 {
		return DefaultAxisSamples + 8
	}
	var vs physics.Violations
	g := resolveAxis(a, r, 1, &vs)
	if vs.Len() > 0 {
		return 0
	}
	h, extent := g.incoherentBinning()
	return min(int(extent/h), MaxIncoherentBins) + 2
}

// incoherentDOS is the tetrahedron DOS of the grid of the Debye–Waller
// options (default 24³), projected on every site, on the bins of
// incoherentBinning up to the highest mode.
func incoherentDOS(ctx context.Context, m *physics.Model, opt Options, g grid) (*siteDOS, error) {
	gm, err := m.GridModes(ctx, opt.DebyeWaller.dwSpec(m.Dim()), physics.GridOptions{Projections: true, Cache: opt.Cache})
	if err != nil {
		return nil, err
	}
	top := 0.0
	for _, f := range gm.FreqTHz {
		top = max(top, f*physics.MeV.PerTHz())
	}
	if !(top > 0) {
		return &siteDOS{G: make([][]float64, m.Sites())}, nil
	}
	h, extent := g.incoherentBinning()
	d, err := spectra.ComputeDOS(ctx, m, gm, spectra.DOSOptions{Unit: physics.MeV, Min: h / 2, Max: min(extent, top+h), Step: h, PerSite: true})
	if err != nil {
		return nil, err
	}
	return &siteDOS{EMeV: d.Freq, G: d.Sites, HMeV: h}, nil
}

// addIncoherent adds the incoherent one-phonon scattering of a powder at
// |Q| = qInvA to row (Squires, Introduction to the Theory of Thermal
// Neutron Scattering, ch. 3, the incoherent one-phonon cross-section,
// averaged over the directions of Q):
//
//	S_inc(|Q|, E) = Σ_j (σ_inc,j/4π) e^{−Q²ū_j} (ħ²Q²/2m_j) g_j(E)/(3E) (n(E) + 1)   (E > 0),
//
// and n(|E|) in place of n + 1 at E < 0 (annihilation): g_j the site's
// projected DOS (∫g_j = p), the 1/3 the direction average of |Q·e|² =
// Q²|e|²/3, and ū_j = tr U_j/3 the isotropic part of the site's
// mean-square displacement (exact for a site of cubic symmetry; for other
// sites the direction average of e^{−Q·U·Q} is taken as e^{−Q²ū}). It is
// the incoherent counterpart of the coherent term in the same unit
// (barn/(sr·unit) per cell: σ_inc/4π in place of b²).
func (s *setup) addIncoherent(row []float64, qInvA float64, dos *siteDOS, g grid) {
	for j, st := range s.sites {
		if st.IncoherentBarn == 0 || dos.G[j] == nil {
			continue
		}
		u := &s.u[j]
		uIso := (u[0] + u[4] + u[8]) / 3
		a := st.IncoherentBarn / (4 * math.Pi) * recoilMeV * qInvA * qInvA * s.invSqrtM[j] * s.invSqrtM[j] * math.Exp(-qInvA*qInvA*uIso)
		for i, e := range dos.EMeV {
			w := a * dos.G[j][i] * dos.HMeV / (3 * e)
			if w == 0 {
				continue
			}
			nb := bose(e, s.kTmeV)
			g.add(row, e, w*(nb+1))
			g.add(row, -e, w*nb)
		}
	}
}
