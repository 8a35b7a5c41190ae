package qha

import (
	"context"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/thermo"
)

// EVPerA3ToGPa is 1 eV/Å³ in GPa: e·10³⁰/10⁹ = 160.2176634 (CODATA 2018
// e, exact).
const EVPerA3ToGPa = physics.ElementaryChargeC * 1e21

// MaxPressureGPa bounds |P| of a quasi-harmonic request.
const MaxPressureGPa = 1e4

// Options configures Compute.
type Options struct {
	Grid          mesh.GridSpec // the grid of every volume's thermal sums
	TempsK        []float64
	PressureGPa   float64 // the pressure at which G = F + PV is minimised
	EOS           EOS
	AllowUnstable bool // leave imaginary modes out of the sums (thermo)
	Cache         *mesh.ReductionCache
}

// Point is the quasi-harmonic state of the crystal at one temperature and
// the options' pressure. Quantities are per cell: eV, eV/K, Å³; the bulk
// modulus in GPa.
type Point struct {
	TempK    float64
	VolumeA3 float64 // V(T), the minimum of G(V) = F(V) + PV
	GibbsEV  float64 // G at V(T) (the Helmholtz F at P = 0)
	// BulkModulusGPa is the isothermal B_T = V ∂²F/∂V² at V(T).
	BulkModulusGPa float64
	// AlphaVolPerK is the volume expansion (1/V)(∂V/∂T)_P = (∂S/∂V)_T/B_T;
	// AlphaLinPerK is a third of it (the mean linear expansion: the
	// volumes are taken as scaled copies of one cell).
	AlphaVolPerK, AlphaLinPerK float64
	CveVPerK                   float64 // Cv at V(T)
	CpeVPerK                   float64 // Cp = Cv + α² B_T V T
	// Gamma is the thermodynamic Grüneisen parameter α B_T V/Cv (0 and
	// GammaOK false where Cv = 0, at T = 0).
	Gamma   float64
	GammaOK bool
	// Fit is the equation of state fitted to F(V_i, T) = E(V_i) +
	// F_vib(V_i, T) with its residuals; EntropyRMS is the RMS residual
	// of the polynomial fit of S(V_i, T) over V whose slope gives α,
	// eV/K.
	Fit        EOSFit
	EntropyRMS float64
	// Bracketed is false when V(T) lies outside the volumes given: the
	// values are then the equation of state's extrapolation, and Warning
	// says so. Found is false when no minimum of G was found at all (the
	// numbers are 0; Warning says why).
	Bracketed, Found bool
	Warning          string
}

// Result is Compute's answer.
type Result struct {
	Points    []Point
	VolumesA3 []float64 // the volumes given, ascending
	// Static is the equation of state of E(V) alone (no vibrations).
	Static EOSFit
	// Thermal is the harmonic result of each volume (ascending volume).
	Thermal []*thermo.ThermalResult
	// Unbracketed counts the points whose minimum lies outside the
	// volumes given or was not found.
	Unbracketed int
}

// Validate checks the options alone (field paths "temperatures_k",
// "pressure_gpa", "eos").
func (o Options) Validate() error {
	var vs physics.Violations
	if err := (thermo.ThermalOptions{TempsK: o.TempsK}).Validate(); err != nil {
		vs.AddErr("", "temperatures_k", err)
	}
	if !(math.Abs(o.PressureGPa) <= MaxPressureGPa) {
		vs.Add("pressure_gpa", "must be finite within ±%g GPa, got %v", MaxPressureGPa, o.PressureGPa)
	}
	if o.EOS != Vinet && o.EOS != BirchMurnaghan {
		vs.Add("eos", "unknown equation of state %d", int(o.EOS))
	}
	return vs.Err()
}

// CheckStatic checks the static energies against the set (field paths
// "static_energies_ev", "static_energies_ev[i]" in the caller's order).
func CheckStatic(nModels int, staticEV []float64) error {
	var vs physics.Violations
	if len(staticEV) != nModels {
		vs.Add("static_energies_ev", "one static energy per model is needed: %d models, %d energies", nModels, len(staticEV))
	}
	for i, e := range staticEV {
		if math.IsNaN(e) || math.IsInf(e, 0) || math.Abs(e) > 1e9 {
			vs.Add(fmt.Sprintf("static_energies_ev[%d]", i), "must be a finite energy per cell within ±1e9 eV, got %v", e)
		}
	}
	return vs.Err()
}

// Compute is the quasi-harmonic approximation (Born & Huang, Dynamical
// Theory of Crystal Lattices, ch. II §11; Wallace, Thermodynamics of
// Crystals, 1972, ch. 1): at each temperature the free energy F(V_i, T) =
// E(V_i) + F_vib(V_i, T) of every volume (E the static energy the caller
// gives, eV per cell in the set's caller order; F_vib the harmonic free
// energy with zero-point energy, package thermo) is fitted with the
// equation of state opt.EOS, and G(V) = F(V) + PV minimised. From the fit:
// V(T), B_T = V d²F/dV²; from polynomial fits over V of the harmonic S and
// Cv: α = (∂S/∂V)_T/B_T (the Maxwell relation (∂P/∂T)_V = (∂S/∂V)_T and
// α B_T = (∂P/∂T)_V), Cv at V(T), Cp = Cv + α² B_T V T, γ = α B_T V/Cv.
// Only 3D crystals (volumes in Å³). The set needs MinQHAVolumes models.
func Compute(ctx context.Context, set *VolumeSet, staticEV []float64, opt Options) (*Result, error) {
	if err := checkCompute(set, staticEV, opt); err != nil {
		return nil, err
	}
	n := len(set.Models)
	e := make([]float64, n)
	for k, i := range set.Index {
		e[k] = staticEV[i]
	}
	static, err := FitEOS(opt.EOS, set.VolA3, e)
	if err != nil {
		return nil, fmt.Errorf("static energies: %w", err)
	}
	res := &Result{VolumesA3: append([]float64(nil), set.VolA3...), Static: *static, Thermal: make([]*thermo.ThermalResult, n)}
	for k, m := range set.Models {
		g, err := m.GridModes(ctx, opt.Grid, physics.GridOptions{Cache: opt.Cache})
		if err != nil {
			return nil, err
		}
		if res.Thermal[k], err = thermo.ComputeThermal(ctx, m, g, thermo.ThermalOptions{TempsK: opt.TempsK, AllowUnstable: opt.AllowUnstable}); err != nil {
			return nil, fmt.Errorf("models[%d]: %w", set.Index[k], err)
		}
	}
	res.Points = make([]Point, len(opt.TempsK))
	for t := range opt.TempsK {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		res.Points[t] = res.point(t, e, opt)
		if !res.Points[t].Bracketed {
			res.Unbracketed++
		}
	}
	return res, nil
}

// checkCompute checks set, energies and options together.
func checkCompute(set *VolumeSet, staticEV []float64, opt Options) error {
	var vs physics.Violations
	if len(set.Models) < MinQHAVolumes {
		vs.Add("models", "the quasi-harmonic fit needs at least %d volumes, got %d", MinQHAVolumes, len(set.Models))
	}
	if d := set.Models[0].Dim(); d != 3 {
		vs.Add("models", "the quasi-harmonic approximation here is for 3D crystals (volumes, pressures), got %d dimensions", d)
	}
	for _, err := range []error{CheckStatic(len(set.Models), staticEV), opt.Validate()} {
		if err != nil {
			vs.AddErr("", "", err)
		}
	}
	return vs.Err()
}

// point is the quasi-harmonic state at temperature index t; e are the
// static energies in the set's (ascending) order.
func (res *Result) point(t int, e []float64, opt Options) Point {
	n := len(e)
	tK := opt.TempsK[t]
	p := Point{TempK: tK}
	f, s, cv := make([]float64, n), make([]float64, n), make([]float64, n)
	for k, th := range res.Thermal {
		tp := th.Points[t]
		f[k], s[k], cv[k] = e[k]+tp.FeV, tp.SeVPerK, tp.CveVPerK
	}
	fit, err := FitEOS(opt.EOS, res.VolumesA3, f)
	if err != nil {
		p.Warning = fmt.Sprintf("T = %g K: %v", tK, err)
		return p
	}
	p.Fit = *fit
	pEV := opt.PressureGPa / EVPerA3ToGPa
	lo, hi := res.VolumesA3[0], res.VolumesA3[n-1]
	v, ok := equilibrium(fit, pEV, lo, hi)
	if !ok {
		p.Warning = fmt.Sprintf("T = %g K: G(V) = F(V) + PV has no minimum between %.4g and %.4g Å³ (the fitted pressure never equals %g GPa there): give volumes around the equilibrium", tK, lo/2, 2*hi, opt.PressureGPa)
		return p
	}
	p.Found = true
	p.Bracketed = v >= lo && v <= hi
	if !p.Bracketed {
		p.Warning = fmt.Sprintf("T = %g K: the minimum of G lies at V = %.6g Å³, outside the volumes given (%.6g to %.6g Å³): the values are the equation of state's extrapolation; add volumes beyond it", tK, v, lo, hi)
	}
	p.VolumeA3 = v
	p.GibbsEV = fit.Energy(v) + pEV*v
	bEV := fit.BulkModulus(v)
	p.BulkModulusGPa = bEV * EVPerA3ToGPa
	deg := min(3, n-2)
	sFit, err1 := fitPoly(res.VolumesA3, s, deg)
	cFit, err2 := fitPoly(res.VolumesA3, cv, deg)
	if err1 != nil || err2 != nil || !(bEV > 0) {
		p.Found, p.Bracketed = false, false
		p.Warning = fmt.Sprintf("T = %g K: no positive bulk modulus or entropy fit at V = %.6g Å³", tK, v)
		return p
	}
	p.EntropyRMS = sFit.rms
	p.CveVPerK = math.Max(0, cFit.at(v))
	if tK > 0 {
		p.AlphaVolPerK = sFit.slope(v) / bEV
	}
	p.AlphaLinPerK = p.AlphaVolPerK / 3
	p.CpeVPerK = p.CveVPerK + p.AlphaVolPerK*p.AlphaVolPerK*bEV*v*tK
	if p.CveVPerK > 0 {
		p.Gamma, p.GammaOK = p.AlphaVolPerK*bEV*v/p.CveVPerK, true
	}
	return p
}

// equilibrium finds V where the fitted pressure −F'(V) equals p (eV/Å³)
// with d²F/dV² > 0 (a minimum of F + pV), searching from lo/2 to 2·hi; of
// several, the one nearest the middle of [lo, hi].
func equilibrium(fit *EOSFit, p, lo, hi float64) (float64, bool) {
	const steps = 600
	a, b := lo/2, 2*hi
	g := func(v float64) float64 { return fit.Pressure(v) - p }
	best, found := 0.0, false
	mid := (lo + hi) / 2
	prevV, prevG := a, g(a)
	for i := 1; i <= steps; i++ {
		v := a + (b-a)*float64(i)/steps
		gv := g(v)
		if prevG > 0 && gv <= 0 { // pressure falling through p: F'' > 0
			r := bisect(g, prevV, v)
			if !found || math.Abs(r-mid) < math.Abs(best-mid) {
				best, found = r, true
			}
		}
		prevV, prevG = v, gv
	}
	return best, found
}

// bisect returns the root of g in [a, b] (g(a) > 0 ≥ g(b)) to rounding.
func bisect(g func(float64) float64, a, b float64) float64 {
	for i := 0; i < 200 && b-a > 1e-14*b; i++ {
		m := (a + b) / 2
		if g(m) > 0 {
			a = m
		} else {
			b = m
		}
	}
	return (a + b) / 2
}
