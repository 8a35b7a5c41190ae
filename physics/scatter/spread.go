package scatter

import (
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
)

// fwhmToSigma is 1/(2√(2 ln 2)): a Gaussian's standard deviation per FWHM.
const fwhmToSigma = 0.42466090014400953

// gaussCut is how many standard deviations a line is spread over on each
// side (the tail beyond is 1.2e-15 of its weight).
const gaussCut = 8

// grid is a checked, resolved energy axis with the resolution.
type grid struct {
	min, step float64
	n         int
	unit      physics.Unit
	mevPer    float64 // meV per axis unit
	res       Resolution
	lo, hi    float64 // the window, for the FWHM clamp
}

// resolveAxis checks a (with Min = Max = 0 resolved to [0, 1.15·topMeV])
// and the resolution, and returns the grid; violations name fields under
// "energy" and "resolution".
func resolveAxis(a Axis, res Resolution, topMeV float64, vs *physics.Violations) grid {
	mp := mevPer(a.Unit)
	if !(res.QFWHM == 0 || (res.QFWHM >= MinEnergy && res.QFWHM <= 1e3)) {
		vs.Add("resolution.q_fwhm_inv_a", "must be 0 (none) or within [%g, 1000] Å⁻¹, got %v", MinEnergy, res.QFWHM)
	}
	switch a.Unit {
	case physics.MeV, physics.THz, physics.CM1:
	default:
		vs.Add("energy.unit", "must be meV, THz or cm⁻¹, got %v", a.Unit)
		return grid{}
	}
	if a.Min == 0 && a.Max == 0 {
		a.Max = 1.15 * topMeV / mp
		if !(a.Max > 0) {
			a.Max = 1
		}
		a.Max = max(a.Max, (DefaultAxisSamples-1)*MinEnergy)
	}
	if a.Step == 0 {
		a.Step = (a.Max - a.Min) / (DefaultAxisSamples - 1)
	}
	bad := false
	for _, f := range []struct {
		name string
		v    float64
	}{{"energy.min", a.Min}, {"energy.max", a.Max}, {"energy.step", a.Step}} {
		if !(math.Abs(f.v) <= MaxEnergy) {
			vs.Add(f.name, "must be a finite number within ±%g, got %v", MaxEnergy, f.v)
			bad = true
		}
	}
	if bad {
		return grid{}
	}
	switch {
	case a.Max < a.Min:
		vs.Add("energy.max", "must be ≥ min (%v), got %v", a.Min, a.Max)
		return grid{}
	case !(a.Step >= MinEnergy):
		vs.Add("energy.step", "must be at least %g (0 for %d steps across the window), got %v", MinEnergy, DefaultAxisSamples-1, a.Step)
		return grid{}
	}
	n := a.samples()
	if a.Max == a.Min {
		n = 1
	}
	if float64(n) > MaxAxisSamples || (a.Max-a.Min)/a.Step+1 > MaxAxisSamples {
		vs.Add("energy.step", "the window %v…%v in steps of %v is %.0f samples, over the engine's bound %d", a.Min, a.Max, a.Step, (a.Max-a.Min)/a.Step+1, MaxAxisSamples)
		return grid{}
	}
	if len(res.FWHM) > MaxFWHMTerms {
		vs.Add("resolution.fwhm", "at most %d coefficients (a cubic in E), got %d", MaxFWHMTerms, len(res.FWHM))
	} else if len(res.FWHM) > 0 {
		res.checkFWHM(vs, a.Min, a.Max)
	}
	if len(res.FWHM) == 0 {
		res.FWHM = []float64{2 * a.Step}
	}
	return grid{min: a.Min, step: a.Step, n: n, unit: a.Unit, mevPer: mp, res: res, lo: a.Min, hi: a.Max}
}

// energies returns the sample energies in the axis unit.
func (g grid) energies() []float64 {
	out := make([]float64, g.n)
	for i := range out {
		out[i] = g.min + float64(i)*g.step
	}
	return out
}

// add spreads a line of weight w at energy eMeV into dst (per axis unit):
// a normalised Gaussian of the resolution's FWHM at the line, sampled at
// the axis energies when its σ is at least the step (the samples then sum
// to the weight to ~1e-8 relative), else averaged over each sample's bin
// [E − step/2, E + step/2) (exact weight in the window).
func (g grid) add(dst []float64, eMeV, w float64) {
	if w == 0 {
		return
	}
	e := eMeV / g.mevPer
	sigma := g.res.fwhmAt(e, g.lo, g.hi) * fwhmToSigma
	first := int(math.Ceil((e - gaussCut*sigma - g.min) / g.step))
	last := int(math.Floor((e + gaussCut*sigma - g.min) / g.step))
	first, last = max(first, 0), min(last, g.n-1)
	if first > last {
		return
	}
	h := g.step
	if sigma < h || g.n == 1 {
		if g.n == 1 { // one energy: the Gaussian's value there
			x := g.min - e
			dst[0] += w * math.Exp(-x*x/(2*sigma*sigma)) / (sigma * math.Sqrt(2*math.Pi))
			return
		}
		inv := 1 / (sigma * math.Sqrt2)
		prev := math.Erf((g.min + (float64(first)-0.5)*h - e) * inv)
		for i := first; i <= last; i++ {
			next := math.Erf((g.min + (float64(i)+0.5)*h - e) * inv)
			dst[i] += w * (next - prev) / (2 * h)
			prev = next
		}
		return
	}
	// g_{i+1} = g_i·r_i, r_{i+1} = r_i·c: two products per sample.
	x := g.min + float64(first)*h - e
	s2 := 2 * sigma * sigma
	v := w * math.Exp(-x*x/s2) / (sigma * math.Sqrt(2*math.Pi))
	r := math.Exp(-(2*x*h + h*h) / s2)
	c := math.Exp(-2 * h * h / s2)
	for i := first; i <= last; i++ {
		dst[i] += v
		v *= r
		r *= c
	}
}

// String describes the grid for errors.
func (g grid) String() string {
	return fmt.Sprintf("%d samples from %v %v in steps of %v", g.n, g.min, g.unit, g.step)
}
