package transport

import (
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/thermo"
)

// BoundaryKind is the shape of a finite sample whose surfaces scatter
// phonons.
type BoundaryKind int

// Boundary kinds. Bulk (no boundary scattering) is the zero value.
const (
	Bulk  BoundaryKind = iota
	Film               // a film of thickness L with surface normal n
	Wire               // a wire of diameter L (κ along its axis)
	Grain              // grains (or any sample) of size L in every direction
)

func (k BoundaryKind) String() string {
	switch k {
	case Bulk:
		return "bulk"
	case Film:
		return "film"
	case Wire:
		return "wire"
	case Grain:
		return "grain"
	}
	return fmt.Sprintf("BoundaryKind(%d)", int(k))
}

// Boundary is one sample geometry (Casimir, Physica 5, 495 (1938);
// specular reflection after Berman, Foster & Ziman, Proc. R. Soc. A 231,
// 130 (1955)): the boundary rate of a mode of velocity v is
//
//	film:  τ⁻¹ = F_p · 2|v·n|/L   (n the unit surface normal)
//	wire:  τ⁻¹ = F_p · |v|/L      (L the diameter)
//	grain: τ⁻¹ = F_p · |v|/L
//
// with F_p = (1 − p)/(1 + p) for the specularity p (the fraction of
// phonons reflected specularly; p = 1 removes boundary scattering). 2|v·n|/L
// is the inverse mean time of flight to a surface of a film, the flight
// along n being uniform on [0, L] (derived; common practice), and |v|/L
// Casimir's mean free path L of a long circular wire of diameter L.
type Boundary struct {
	Kind        BoundaryKind
	SizeM       float64    // L, m
	Normal      [3]float64 // film surface normal, Cartesian (any length)
	Specularity float64    // p in [0, 1]
}

// Umklapp selects the empirical Umklapp rate in the form used by Slack
// (Slack & Galginaitis, Phys. Rev. 133, A253 (1964); Slack, Solid State
// Physics 34, 1 (1979)):
//
//	τ_U⁻¹ = b · ħ γ² ω² T e^(−θ/3T) / (M̄ v̄² θ)
//
// with b a dimensionless constant of order one (default 1), γ the
// Grüneisen parameter of the mode, M̄ the mean atomic mass, v̄ the Debye
// mean sound velocity (3/v̄³ = Σ_s ⟨1/v_s³⟩ over the acoustic branches) and
// θ the acoustic Debye temperature θ_a = θ_D n^(−1/3) (n sites per cell).
// Zero values of ThetaK, VelocityKmS and MeanMassAmu take them from the
// model (its elastic θ_D and sound velocities, its site masses). The
// constant b and the γ are what a fit to measured conductivities adjusts.
type Umklapp struct {
	On          bool
	B           float64   // b, dimensionless; 0 means 1
	Gamma       float64   // γ of every mode (used when the two below are empty)
	GammaBranch []float64 // γ per branch (modes counted by frequency at each q)
	GammaMode   []float64 // γ per mode of the grid, [point·modes + k] (e.g. qha.GridGruneisen)
	ThetaK      float64   // θ, K; 0: the model's θ_a
	VelocityKmS float64   // v̄, km/s; 0: the model's Debye mean
	MeanMassAmu float64   // M̄, u; 0: the mean site mass
}

// PointDefects is mass-difference scattering by isotopes and substitutional
// point defects (Klemens, Proc. Phys. Soc. A 68, 1113 (1955); Tamura,
// Phys. Rev. B 27, 858 (1983)) in Tamura's form for the density of states,
//
//	τ⁻¹ = (π/6) V_a Γ ω² g(ω),
//
// g(ω) the phonon DOS per unit volume and frequency ω (∫g dω = 3/V_a),
// V_a the volume per atom, Γ = Σ_σ c_σ (m̄_σ/M̄)² g₂(σ) over the sites σ
// (c_σ = 1/n, m̄_σ the site's mean mass, M̄ the mean of the m̄_σ; common
// practice for several sites) and g₂ = Σ_i f_i(1 − m_i/m̄)² the mass
// variance of each site. With the Debye DOS g = 3ω²/(2π²v³) it is Klemens'
// V_a Γ ω⁴/(4π v³). SiteG2 gives g₂ per site; nil takes each site's from
// the natural isotopes of the element its label names (NaturalIsotopes),
// an unknown element being an error.
type PointDefects struct {
	On     bool
	SiteG2 []float64
}

// PowerLaw is a user rate τ⁻¹ = A (ν/1 THz)ⁿ: n = 0 a constant rate.
type PowerLaw struct {
	On       bool
	RatePerS float64 // A, 1/s
	Exponent float64 // n ≥ 0
}

// Options configures Compute.
type Options struct {
	Grid       mesh.GridSpec
	TempsK     []float64
	Boundaries []Boundary // one κ(T) series per sample geometry; none means bulk
	Defects    PointDefects
	Umklapp    Umklapp
	PowerLaw   PowerLaw
	// CumulativeTempK, when > 0, adds for every series the cumulative κ
	// against mean free path and against frequency at that temperature,
	// on CumulativeBins points (0: DefaultCumulativeBins).
	CumulativeTempK float64
	CumulativeBins  int
	AllowUnstable   bool // leave imaginary modes out instead of failing
	Cache           *mesh.ReductionCache
}

// Limits of the options.
const (
	MaxBoundaries         = 32
	DefaultCumulativeBins = 100
	MaxCumulativeBins     = 10_000
	MaxSizeM              = 10.0  // 10 m: far beyond any sample
	MinSizeM              = 1e-10 // 1 Å
	MaxRatePerS           = 1e18
	MaxExponent           = 8
	MaxGamma              = 100
)

// Validate checks the options alone, every violation at once, with field
// paths as the service names them ("samples[1].size_m" for Boundaries[1],
// "umklapp.gruneisen" for Umklapp.Gamma, …).
func (o Options) Validate() error {
	var vs physics.Violations
	if err := (thermo.ThermalOptions{TempsK: o.TempsK}).Validate(); err != nil {
		vs.AddErr("", "temperatures_k", err)
	}
	if len(o.Boundaries) > MaxBoundaries {
		vs.Add("samples", "%d sample geometries, more than the limit of %d", len(o.Boundaries), MaxBoundaries)
	}
	for i, b := range o.Boundaries {
		b.check(&vs, fmt.Sprintf("samples[%d]", i))
	}
	o.Umklapp.check(&vs)
	if p := o.PowerLaw; p.On {
		if !(p.RatePerS >= 0 && p.RatePerS <= MaxRatePerS) {
			vs.Add("power_law.rate_per_s", "must be in [0, %g] 1/s, got %v", MaxRatePerS, p.RatePerS)
		}
		if !(p.Exponent >= 0 && p.Exponent <= MaxExponent) {
			vs.Add("power_law.exponent", "must be in [0, %d], got %v", MaxExponent, p.Exponent)
		}
	}
	for i, g := range o.Defects.SiteG2 {
		if !(g >= 0 && g <= 1) {
			vs.Add(fmt.Sprintf("point_defects.site_g2[%d]", i), "must be a mass variance in [0, 1], got %v", g)
		}
	}
	if t := o.CumulativeTempK; !(t >= 0 && t <= thermo.MaxTempK) {
		vs.Add("cumulative_temperature_k", "must be in [0, %g] K (0: no cumulative curves), got %v", thermo.MaxTempK, t)
	}
	if !(o.CumulativeBins >= 0 && o.CumulativeBins <= MaxCumulativeBins) {
		vs.Add("cumulative_bins", "must be in [0, %d] (0: %d), got %d", MaxCumulativeBins, DefaultCumulativeBins, o.CumulativeBins)
	}
	if !o.scatters() {
		vs.Add("samples", "no scattering mechanism is on: κ of a perfect infinite crystal is infinite in this model; give a sample size or turn on point defects, Umklapp or a power law")
	}
	return vs.Err()
}

// scatters reports whether every series has some scattering.
func (o Options) scatters() bool {
	if o.Defects.On || o.Umklapp.On || (o.PowerLaw.On && o.PowerLaw.RatePerS > 0) {
		return true
	}
	if len(o.Boundaries) == 0 {
		return false
	}
	for _, b := range o.Boundaries {
		if b.Kind == Bulk || b.Specularity == 1 {
			return false
		}
	}
	return true
}

func (b Boundary) check(vs *physics.Violations, f string) {
	if b.Kind < Bulk || b.Kind > Grain {
		vs.Add(f+".kind", "unknown sample geometry %d", int(b.Kind))
		return
	}
	if b.Kind == Bulk {
		return
	}
	if !(b.SizeM >= MinSizeM && b.SizeM <= MaxSizeM) {
		vs.Add(f+".size_m", "must be a size in [%g, %g] m, got %v", MinSizeM, MaxSizeM, b.SizeM)
	}
	if !(b.Specularity >= 0 && b.Specularity <= 1) {
		vs.Add(f+".specularity", "must be in [0, 1], got %v", b.Specularity)
	}
	if b.Kind == Film {
		n := b.Normal
		l := math.Sqrt(n[0]*n[0] + n[1]*n[1] + n[2]*n[2])
		if !(l > 1e-12) || !finite(l) {
			vs.Add(f+".normal", "a film needs its surface normal: a finite non-zero vector, got %v", n)
		}
	}
}

func (u Umklapp) check(vs *physics.Violations) {
	if !u.On {
		return
	}
	if !(u.B >= 0 && u.B <= 1e6) {
		vs.Add("umklapp.b", "must be in [0, 1e6] (0: 1), got %v", u.B)
	}
	if !(math.Abs(u.Gamma) <= MaxGamma) {
		vs.Add("umklapp.gruneisen", "must be finite within ±%d, got %v", MaxGamma, u.Gamma)
	}
	if u.Gamma == 0 && len(u.GammaBranch) == 0 && len(u.GammaMode) == 0 {
		vs.Add("umklapp.gruneisen", "Umklapp scattering needs the Grüneisen parameter: give it for the crystal, per branch, or models at other volumes")
	}
	for i, g := range u.GammaBranch {
		if !(math.Abs(g) <= MaxGamma) {
			vs.Add(fmt.Sprintf("umklapp.gruneisen_per_branch[%d]", i), "must be finite within ±%d, got %v", MaxGamma, g)
		}
	}
	for _, c := range []struct {
		f string
		x float64
	}{{"umklapp.theta_k", u.ThetaK}, {"umklapp.velocity_km_s", u.VelocityKmS}, {"umklapp.mean_mass_amu", u.MeanMassAmu}} {
		if !(c.x >= 0 && c.x <= 1e6) {
			vs.Add(c.f, "must be in [0, 1e6] (0: from the model), got %v", c.x)
		}
	}
}
