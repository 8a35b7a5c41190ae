// The fit problem: the starting model, the free parameters with their
// bounds and ties, and the data with their uncertainties.

package fit

import (
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// Polarization is a hint of a measured mode's polarisation.
type Polarization int

// Polarisation hints. AnyPolarization is the zero value: no hint.
const (
	AnyPolarization Polarization = iota
	Longitudinal                 // the mass-weighted displacement mostly along q̂
	Transverse                   // mostly across q̂
)

func (p Polarization) String() string {
	switch p {
	case Longitudinal:
		return "longitudinal"
	case Transverse:
		return "transverse"
	}
	return ""
}

// Frequency is one measured mode frequency at a wavevector (a dispersion
// point: inelastic neutron or X-ray scattering).
type Frequency struct {
	Q        [3]float64 // fractional reciprocal coordinates (physics/doc.go)
	FreqTHz  float64    // measured ν, THz
	SigmaTHz float64    // its standard uncertainty, THz, > 0
	// Branch is the measured branch, 1-based in ascending frequency at Q;
	// 0 assigns the point to a model branch at every evaluation (the
	// nearest, or with Polarization the nearest of that character).
	Branch       int
	Polarization Polarization
}

// GammaFrequency is a measured frequency at Γ (Raman, infrared).
type GammaFrequency struct {
	FreqTHz  float64 // THz
	SigmaTHz float64 // THz, > 0
	// Branch, 1-based in ascending frequency at Γ; 0: the nearest optical
	// branch (the p acoustic branches, zero at Γ, are never assigned).
	Branch int
}

// Velocity is a measured speed of sound along a direction (ultrasound,
// Brillouin scattering).
type Velocity struct {
	Dir      [3]float64 // Cartesian direction (any length), projected on the lattice's span
	KmS      float64    // km/s
	SigmaKmS float64    // km/s, > 0
	// Branch among the p acoustic branches, 1-based in ascending speed; 0
	// assigns the nearest (with Polarization: of that character).
	Branch       int
	Polarization Polarization
}

// ElasticConstant is a measured elastic constant C_IJ (Voigt notation,
// 1 = xx, 2 = yy, 3 = zz, 4 = yz, 5 = xz, 6 = xy), I ≤ J, of a
// three-dimensional crystal with three polarizations.
type ElasticConstant struct {
	I, J     int
	GPa      float64
	SigmaGPa float64 // GPa, > 0
}

// HeatBasis is the amount a heat capacity is given per.
type HeatBasis int

// Heat-capacity bases. PerMolAtoms is the zero value.
const (
	PerMolAtoms HeatBasis = iota // J/(K·mol of atoms): the cell's value over its sites, times N_A
	PerMolCells                  // J/(K·mol of cells)
	PerKg                        // J/(K·kg)
)

func (b HeatBasis) String() string {
	switch b {
	case PerMolCells:
		return "J/(K·mol cells)"
	case PerKg:
		return "J/(K·kg)"
	}
	return "J/(K·mol atoms)"
}

// HeatCapacity is one measured heat capacity at constant volume.
type HeatCapacity struct {
	TempK float64 // K, > 0
	Value float64 // in the set's basis
	Sigma float64 // same unit, > 0
}

// HeatCapacitySet is a series of heat capacities on one basis, computed
// by the mode sum over one grid.
type HeatCapacitySet struct {
	Grid   mesh.GridSpec // Monkhorst–Pack grid of the mode sum (not a finite crystal)
	Basis  HeatBasis
	Points []HeatCapacity
}

// Free is a free parameter with optional bounds (in the model's force
// unit).
type Free struct {
	Path               string
	Lower, Upper       float64
	HasLower, HasUpper bool
}

// Tie makes the parameter at Path follow a free parameter: value(Path) =
// Ratio × value(To). Ratio 0 means 1 (equal).
type Tie struct {
	Path, To string
	Ratio    float64
}

// Progress reports one evaluation of the fit.
type Progress struct {
	Iteration   int     // Levenberg–Marquardt iterations completed
	Evaluations int     // model evaluations so far
	ChiSquare   float64 // χ² of the best point so far
	Lambda      float64 // the damping μ (relative to the scaled normal matrix)
}

// Problem is a fit: the starting model, what is free, and the data.
// Field paths of its violations follow the protobuf request of the fit
// (free[i].path, frequencies[j].sigma_thz, heat_capacities[k].points[l].temperature_k, …).
type Problem struct {
	Crystal *physics.Crystal
	Options physics.Options // compile options of every model of the fit

	Free []Free
	Ties []Tie

	Frequencies      []Frequency
	GammaFrequencies []GammaFrequency
	SoundVelocities  []Velocity
	ElasticConstants []ElasticConstant
	HeatCapacities   []HeatCapacitySet

	// MaxEvaluations bounds the model evaluations (values and derivatives
	// together); 0 means DefaultMaxEvaluations.
	MaxEvaluations int
	// Progress, when set, is called after every evaluation, on the
	// calling goroutine.
	Progress func(Progress)
}

// Limits of a fit.
const (
	DefaultMaxEvaluations = 100
	MaxEvaluationsCap     = 10000
	// MaxData bounds the data of one fit (every datum of every kind,
	// heat-capacity points included).
	MaxData = 100000
)

// DataCount is the number of data of p, every kind.
func (p *Problem) DataCount() int {
	n := len(p.Frequencies) + len(p.GammaFrequencies) + len(p.SoundVelocities) + len(p.ElasticConstants)
	for _, s := range p.HeatCapacities {
		n += len(s.Points)
	}
	return n
}

func (p *Problem) maxEvaluations() int {
	if p.MaxEvaluations == 0 {
		return DefaultMaxEvaluations
	}
	return p.MaxEvaluations
}

// Validate checks everything that can be checked before compiling the
// model (the model itself is Compile's to check): every violation at once,
// as a *physics.ValidationError with the request's field paths.
func (p *Problem) Validate() error {
	var vs physics.Violations
	p.validate(&vs)
	return vs.Err()
}

func (p *Problem) validate(vs *physics.Violations) {
	if p.Crystal == nil {
		vs.Add("model", "a starting model is required")
		return
	}
	d, np := p.Crystal.Dim(), p.Crystal.P()
	p.checkParams(vs)
	if p.DataCount() == 0 {
		vs.Add("frequencies", "no data: give frequencies, gamma_frequencies, sound_velocities, elastic_constants or heat_capacities")
	} else if n := p.DataCount(); n > MaxData {
		vs.Add("frequencies", "%d data exceed the limit of %d", n, MaxData)
	}
	for i, f := range p.Frequencies {
		checkFrequency(vs, fmt.Sprintf("frequencies[%d]", i), f, d, np)
	}
	for i, g := range p.GammaFrequencies {
		f := fmt.Sprintf("gamma_frequencies[%d]", i)
		checkValue(vs, f, "frequency_thz", "sigma_thz", g.FreqTHz, g.SigmaTHz)
		if g.Branch < 0 || (g.Branch > 0 && g.Branch <= np) {
			vs.Add(f+".branch", "must be 0 (the nearest optical branch) or an optical branch > %d (the %d acoustic branches are zero at Γ), got %d", np, np, g.Branch)
		}
	}
	for i, v := range p.SoundVelocities {
		checkVelocity(vs, fmt.Sprintf("sound_velocities[%d]", i), v, np)
	}
	for i, e := range p.ElasticConstants {
		f := fmt.Sprintf("elastic_constants[%d]", i)
		if d != 3 || np != 3 {
			vs.Add(f, "elastic constants need a three-dimensional crystal with three polarizations (this one: d = %d, p = %d); give sound_velocities instead", d, np)
		}
		if e.I < 1 || e.I > 6 || e.J < e.I || e.J > 6 {
			vs.Add(f+".ij", "must be a Voigt pair IJ with 1 ≤ I ≤ J ≤ 6 (11, 12, 44, …), got %d%d", e.I, e.J)
		}
		checkValue(vs, f, "gpa", "sigma_gpa", e.GPa, e.SigmaGPa)
	}
	for i, s := range p.HeatCapacities {
		checkHeatSet(vs, fmt.Sprintf("heat_capacities[%d]", i), s, d)
	}
	if p.MaxEvaluations < 0 || p.MaxEvaluations > MaxEvaluationsCap {
		vs.Add("max_evaluations", "must be 0 (the default, %d) or between 1 and %d, got %d", DefaultMaxEvaluations, MaxEvaluationsCap, p.MaxEvaluations)
	}
}

// MaxDatum bounds every measured value and σ in magnitude, and 1/MaxDatum
// every σ from below: (value − model)/σ then stays within 1e100 and χ²
// finite for any number of data. Real data are many orders inside.
const MaxDatum = 1e50

// checkValue checks a measured value and its σ.
func checkValue(vs *physics.Violations, f, value, sigma string, x, s float64) {
	if !finite(x) || math.Abs(x) > MaxDatum {
		vs.Add(f+"."+value, "must be a finite number within ±%g, got %v", MaxDatum, x)
	}
	if !(s >= 1/MaxDatum && s <= MaxDatum) {
		vs.Add(f+"."+sigma, "must be a standard uncertainty in [%g, %g], got %v", 1/MaxDatum, MaxDatum, s)
	}
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func checkFrequency(vs *physics.Violations, f string, x Frequency, d, p int) {
	checkValue(vs, f, "frequency_thz", "sigma_thz", x.FreqTHz, x.SigmaTHz)
	okQ := true
	for k, q := range x.Q {
		name := fmt.Sprintf("%s.q.q%d", f, k+1)
		switch {
		case !finite(q) || math.Abs(q) > physics.MaxQ:
			vs.Add(name, "must be a finite number within ±%g, got %v", physics.MaxQ, q)
			okQ = false
		case k >= d && q != 0:
			vs.Add(name, "must be 0 for a %d-dimensional crystal, got %v", d, q)
			okQ = false
		}
	}
	if x.Branch < 0 || x.Branch > p*maxSitesHint {
		vs.Add(f+".branch", "must be 0 (assigned by the fit) or a branch number ≥ 1, got %d", x.Branch)
	}
	gamma := okQ && physics.IsGamma(x.Q)
	if gamma && x.Branch > 0 && x.Branch <= p {
		vs.Add(f+".branch", "branch %d at Γ is acoustic, zero by the sum rule: measured optical modes at Γ are branches > %d", x.Branch, p)
	}
	if x.Polarization < AnyPolarization || x.Polarization > Transverse {
		vs.Add(f+".polarization", "unknown polarization %d", x.Polarization)
	} else if gamma && x.Polarization != AnyPolarization {
		vs.Add(f+".polarization", "a polarization hint needs a direction: q = Γ has none")
	}
}

// maxSitesHint bounds a branch number before the model is compiled (the
// number of sites is checked against the compiled model afterwards).
const maxSitesHint = 1 << 20

func checkVelocity(vs *physics.Violations, f string, v Velocity, p int) {
	checkValue(vs, f, "km_s", "sigma_km_s", v.KmS, v.SigmaKmS)
	if !(v.KmS > 0) && finite(v.KmS) {
		vs.Add(f+".km_s", "must be > 0 (a speed), got %v", v.KmS)
	}
	zero := true
	for k, x := range v.Dir {
		if !finite(x) || math.Abs(x) > physics.MaxLengthA {
			vs.Add(fmt.Sprintf("%s.direction.%c", f, "xyz"[k]), "must be a finite number within ±%g, got %v", physics.MaxLengthA, x)
		}
		zero = zero && x == 0
	}
	if zero {
		vs.Add(f+".direction", "must not be zero")
	}
	if v.Branch < 0 || v.Branch > p {
		vs.Add(f+".branch", "must be 0 (assigned by the fit) or an acoustic branch 1..%d (ascending speed), got %d", p, v.Branch)
	}
	if v.Polarization < AnyPolarization || v.Polarization > Transverse {
		vs.Add(f+".polarization", "unknown polarization %d", v.Polarization)
	}
}

func checkHeatSet(vs *physics.Violations, f string, s HeatCapacitySet, d int) {
	if s.Grid.Finite {
		vs.Add(f+".grid", "must be a Monkhorst–Pack grid, not a finite crystal")
	}
	if _, probs := s.Grid.Check(d, f+".grid.mesh"); len(probs) > 0 {
		for _, pr := range probs {
			vs.Add(pr.Field, "%s", pr.Description)
		}
	}
	if s.Basis < PerMolAtoms || s.Basis > PerKg {
		vs.Add(f+".basis", "unknown basis %d", s.Basis)
	}
	if len(s.Points) == 0 {
		vs.Add(f+".points", "at least one point is required")
	}
	for j, pt := range s.Points {
		g := fmt.Sprintf("%s.points[%d]", f, j)
		if !(pt.TempK > 0) || pt.TempK > MaxTempK {
			vs.Add(g+".temperature_k", "must be in (0, %g] K, got %v", MaxTempK, pt.TempK)
		}
		checkValue(vs, g, "value", "sigma", pt.Value, pt.Sigma)
	}
}

// MaxTempK bounds the temperatures of heat-capacity data, K.
const MaxTempK = 1e6
