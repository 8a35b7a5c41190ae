package scatter

import (
	"context"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// WeightedDOSResult is the neutron-weighted density of states.
type WeightedDOSResult struct {
	Unit     physics.Unit
	Energies []float64 // axis energies (≥ 0), Unit
	FWHM     []float64 // energy resolution used (axis unit)
	// Weighted is Σ_j (σ_j/m_j) g_j(E), barn/amu per unit per cell, with
	// σ_j = 4π b_j² + σ_inc,j the site's total bound scattering
	// cross-section and g_j its projected DOS (states per cell per unit,
	// integrating to p); Normalized is Weighted divided by the mean of
	// σ_j/m_j over the sites, so it integrates to p × sites like g.
	Weighted, Normalized []float64
	// Sites[j] is site j's term (σ_j/m_j) g_j(E), barn/amu per unit.
	Sites             [][]float64
	WeightsBarnPerAmu []float64 // σ_j/m_j per site
	Imaginary         int
}

// ComputeWeightedDOS returns the neutron-weighted phonon DOS in the
// incoherent approximation (each site's projected DOS weighted by its
// total bound cross-section over its mass: what an incoherent, or a
// polycrystalline coherent scatterer at large |Q|, shows; Squires ch. 3 and
// 5): the tetrahedron DOS of the grid, per site, on the axis (bin
// averages), then broadened with the energy resolution. The axis starts
// at 0 (a DOS has no negative side); Min = Max = 0 for a window from the
// modes.
func ComputeWeightedDOS(ctx context.Context, m *physics.Model, grid mesh.GridSpec, opt Options) (*WeightedDOSResult, error) {
	var vs physics.Violations
	checkOptions(m, opt, &vs)
	if opt.Probe != Neutron {
		vs.Add("probe", "the weighted DOS is for neutrons (σ/m weights)")
	}
	if opt.Axis.Min < 0 {
		vs.Add("energy.min", "must be ≥ 0 for a DOS, got %v", opt.Axis.Min)
	}
	resolveAxis(opt.Axis, opt.Resolution, 1, &vs)
	if err := vs.Err(); err != nil {
		return nil, err
	}
	gm, err := m.GridModes(ctx, grid, physics.GridOptions{Projections: true, Cache: opt.Cache})
	if err != nil {
		return nil, err
	}
	top := 0.0
	for _, f := range gm.FreqTHz {
		top = max(top, f)
	}
	g := resolveAxis(opt.Axis, opt.Resolution, top*physics.MeV.PerTHz(), &vs)
	if err := vs.Err(); err != nil {
		return nil, err
	}
	// The DOS on the axis's own samples (bin averages), from 0 or Min.
	dos, err := spectra.ComputeDOS(ctx, m, gm, spectra.DOSOptions{Unit: g.unit, Min: g.min, Max: g.min + float64(g.n-1)*g.step, Step: g.step, PerSite: true})
	if err != nil {
		return nil, err
	}
	res := &WeightedDOSResult{Unit: g.unit, Energies: g.energies(), FWHM: g.res.FWHM, Imaginary: dos.Imaginary,
		Weighted: make([]float64, g.n), Normalized: make([]float64, g.n)}
	mean := 0.0
	for j, st := range opt.Sites {
		w := (4*math.Pi*st.CoherentFm*st.CoherentFm*fm2ToBarn + st.IncoherentBarn) / m.MassAmu(j)
		res.WeightsBarnPerAmu = append(res.WeightsBarnPerAmu, w)
		mean += w / float64(m.Sites())
		site := make([]float64, g.n)
		for i, v := range dos.Sites[j] {
			if i < g.n {
				g.add(site, dos.Freq[i]*g.mevPer, w*v*g.step)
			}
		}
		res.Sites = append(res.Sites, site)
		for i, v := range site {
			res.Weighted[i] += v
		}
	}
	for i, v := range res.Weighted {
		if mean > 0 {
			res.Normalized[i] = v / mean
		}
	}
	if !allFinite(res.Weighted) || !allFinite(res.Normalized) {
		return nil, overflow("the weighted DOS", top*physics.MeV.PerTHz(), opt.TempK)
	}
	return res, nil
}
