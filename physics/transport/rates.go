package transport

import (
	"context"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/lattice"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// boundaryRate is the boundary rate of a mode of velocity v (m/s) in
// sample bd, 1/s (see Boundary).
func boundaryRate(bd Boundary, v [3]float64) float64 {
	if bd.Kind == Bulk || bd.Specularity >= 1 {
		return 0
	}
	f := (1 - bd.Specularity) / (1 + bd.Specularity)
	switch bd.Kind {
	case Film:
		n := bd.Normal
		l := math.Sqrt(n[0]*n[0] + n[1]*n[1] + n[2]*n[2])
		vn := (v[0]*n[0] + v[1]*n[1] + v[2]*n[2]) / l
		return f * 2 * math.Abs(vn) / bd.SizeM
	default: // wire, grain
		return f * math.Sqrt(v[0]*v[0]+v[1]*v[1]+v[2]*v[2]) / bd.SizeM
	}
}

// rates fills the T-independent rates of every mode (point defects and
// the power law) and the Umklapp coefficients, recording the constants
// used in res.
func (md *modeData) rates(ctx context.Context, m *physics.Model, spec mesh.GridSpec, opt Options, res *Result) error {
	md.rint = make([]float64, len(md.nu))
	md.ucoef = make([]float64, len(md.nu))
	if p := opt.PowerLaw; p.On {
		for i, f := range md.nu {
			if md.keep[i] {
				md.rint[i] += p.RatePerS * math.Pow(f, p.Exponent)
			}
		}
	}
	if opt.Defects.On {
		if err := md.defectRates(ctx, m, spec, opt.Defects, res); err != nil {
			return err
		}
	}
	if opt.Umklapp.On {
		return md.umklappRates(ctx, m, opt.Umklapp, res)
	}
	return nil
}

// DefectGamma is Γ = Σ_σ c_σ (m̄_σ/M̄)² g₂(σ) of a model's sites (see
// PointDefects), from g2 per site or, when nil, the natural isotopes of
// each site's element.
func DefectGamma(m *physics.Model, g2 []float64) (float64, error) {
	n := m.Sites()
	if g2 == nil {
		g2 = make([]float64, n)
		for i, l := range m.Labels() {
			g, err := SiteMassVariance(l)
			if err != nil {
				return 0, fmt.Errorf("site %d: %w", i, err)
			}
			g2[i] = g
		}
	}
	var mbar float64
	for i := 0; i < n; i++ {
		mbar += m.MassAmu(i) / float64(n)
	}
	var gamma float64
	for i := 0; i < n; i++ {
		r := m.MassAmu(i) / mbar
		gamma += r * r * g2[i] / float64(n)
	}
	return gamma, nil
}

// defectRates adds Tamura's point-defect rate (DefectRate) to every mode.
func (md *modeData) defectRates(ctx context.Context, m *physics.Model, spec mesh.GridSpec, d PointDefects, res *Result) error {
	gamma, err := DefectGamma(m, d.SiteG2)
	if err != nil {
		return err
	}
	res.DefectGamma = gamma
	if gamma == 0 {
		return nil
	}
	rate, err := DefectRate(ctx, m, spec, gamma)
	if err != nil {
		return err
	}
	for i, f := range md.nu {
		if md.keep[i] {
			md.rint[i] += rate(f)
		}
	}
	return nil
}

// DefectRate returns Tamura's point-defect rate τ⁻¹(ν) (1/s, ν in THz) of
// model m for the mass-variance parameter gamma, (π/6) V_a Γ ω² g(ω),
// which with the DOS g_ν in states per cell per THz is Γ ω² g_ν(ν)/(12 n
// 10¹²) for n sites per cell (V_a g(ω) = g_ν/(2π·10¹² n): derived from
// the normalisations). g_ν is the linear-tetrahedron DOS of the grid
// (package spectra); below three times the grid's lowest positive mode,
// where tetrahedra undercount the long-wave states, it is at least the
// elastic-limit Debye DOS 9nν²/ν_D³, exact as ν → 0 (ν_D from the model's
// elastic Debye temperature: the Debye solid of its sound velocities).
func DefectRate(ctx context.Context, m *physics.Model, spec mesh.GridSpec, gamma float64) (func(nuTHz float64) float64, error) {
	g, err := m.GridModes(ctx, spec, physics.GridOptions{})
	if err != nil {
		return nil, err
	}
	dos, err := spectra.ComputeDOS(ctx, m, g, spectra.DOSOptions{})
	if err != nil {
		return nil, err
	}
	thetaD, err := m.ElasticDebyeTemperature(ctx)
	if err != nil {
		return nil, err
	}
	n := float64(m.Sites())
	nuD := thetaD / physics.THzToKelvin
	low := math.Inf(1)
	for _, f := range g.FreqTHz {
		if f > 0 {
			low = math.Min(low, f)
		}
	}
	return func(f float64) float64 {
		gnu := dosAt(dos, f)
		if f <= 3*low && nuD > 0 {
			gnu = math.Max(gnu, 9*n*f*f/(nuD*nuD*nuD))
		}
		w := 2 * math.Pi * f * 1e12
		return gamma * w * w * gnu / (12 * n * 1e12)
	}, nil
}

// dosAt interpolates the DOS linearly between its samples (0 outside).
func dosAt(d *spectra.DOSResult, f float64) float64 {
	if len(d.Freq) < 2 {
		return 0
	}
	step := d.Freq[1] - d.Freq[0]
	x := (f - d.Freq[0]) / step
	i := int(math.Floor(x))
	switch {
	case i < 1: // below the first sample past 0: the ν² of a 3D DOS near 0
		r := math.Max(0, f/d.Freq[1])
		return d.DOS[1] * r * r
	case i >= len(d.Freq)-1:
		return d.DOS[len(d.DOS)-1]
	}
	t := x - float64(i)
	return d.DOS[i]*(1-t) + d.DOS[i+1]*t
}

// UmklappConstants are θ (K), v̄ (km/s) and M̄ (u) of the Umklapp rate for
// model m: the options' values where given, otherwise θ_a = θ_D n^(−1/3)
// from the elastic θ_D, v̄ = ν_D (4πV/3n)^(1/3) (the Debye mean velocity:
// ν_D³ = 3n v̄³/(4πV), Debye 1912) and the mean site mass.
func UmklappConstants(ctx context.Context, m *physics.Model, u Umklapp) (thetaK, vKmS, massAmu float64, err error) {
	n := float64(m.Sites())
	thetaD, err := m.ElasticDebyeTemperature(ctx)
	if err != nil {
		return 0, 0, 0, err
	}
	lat := m.Lattice()
	vol := lattice.GramMeasure(lat[:3])
	thetaK, vKmS, massAmu = u.ThetaK, u.VelocityKmS, u.MeanMassAmu
	if thetaK == 0 {
		thetaK = thetaD * math.Cbrt(1/n)
	}
	if vKmS == 0 {
		nuD := thetaD / physics.THzToKelvin              // THz
		vKmS = nuD * math.Cbrt(4*math.Pi*vol/(3*n)) / 10 // Å·THz → km/s
	}
	if massAmu == 0 {
		for i := 0; i < m.Sites(); i++ {
			massAmu += m.MassAmu(i) / n
		}
	}
	if !(thetaK > 0 && vKmS > 0 && massAmu > 0) {
		return 0, 0, 0, fmt.Errorf("the model has no elastic Debye temperature (a zero or imaginary sound velocity): give umklapp.theta_k and umklapp.velocity_km_s")
	}
	return thetaK, vKmS, massAmu, nil
}

// umklappRates fills the Umklapp coefficients b ħ γ² ω² /(M̄ v̄² θ), the
// rate being that times T e^(−θ/3T).
func (md *modeData) umklappRates(ctx context.Context, m *physics.Model, u Umklapp, res *Result) error {
	theta, vKmS, mass, err := UmklappConstants(ctx, m, u)
	if err != nil {
		return err
	}
	res.ThetaK, res.VelocityKmS, res.MeanMassAmu = theta, vKmS, mass
	md.theta = theta
	b := u.B
	if b == 0 {
		b = 1
	}
	v := vKmS * 1e3
	pre := b * physics.ReducedPlanckJS / (mass * physics.AtomicMassKg * v * v * theta)
	n := m.ModeCount()
	for i, f := range md.nu {
		if !md.keep[i] {
			continue
		}
		g := u.Gamma
		switch {
		case len(u.GammaMode) > 0:
			g = u.GammaMode[i]
		case len(u.GammaBranch) > 0:
			g = u.GammaBranch[i%n]
		}
		w := 2 * math.Pi * f * 1e12
		md.ucoef[i] = pre * g * g * w * w
	}
	return nil
}
