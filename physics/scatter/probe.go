package scatter

import (
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
)

// Probe is the radiation whose scattering is computed.
type Probe int

// Probes. Neutron is the zero value.
const (
	Neutron Probe = iota // nuclear scattering, lengths b in fm
	XRay                 // Thomson scattering, form factors f(Q) in electrons
)

func (p Probe) String() string {
	switch p {
	case Neutron:
		return "neutron"
	case XRay:
		return "xray"
	}
	return fmt.Sprintf("Probe(%d)", int(p))
}

// FormFactor is an X-ray atomic form factor in the four-Gaussian-plus-
// constant form of International Tables for Crystallography Vol. C,
// Table 6.1.1.4:
//
//	f(s) = Σ_{i=1..4} A_i exp(−B_i s²) + C,   s = sinθ/λ = |Q|/4π (Å⁻¹),
//
// in electrons, with B_i in Å². A zero A is a constant form factor C. The
// coefficients are the caller's (no table is built in).
type FormFactor struct {
	A, B [4]float64
	C    float64
}

// At returns f at |Q| = qInvA (Å⁻¹).
func (f FormFactor) At(qInvA float64) float64 {
	s2 := qInvA * qInvA / (16 * math.Pi * math.Pi)
	v := f.C
	for i := range f.A {
		if f.A[i] != 0 {
			v += f.A[i] * math.Exp(-f.B[i]*s2)
		}
	}
	return v
}

// SiteScatterer is what one site scatters with.
type SiteScatterer struct {
	CoherentFm     float64    // bound coherent scattering length b_c, fm (neutrons)
	IncoherentBarn float64    // bound incoherent cross-section σ_inc, barn (neutrons)
	FormFactor     FormFactor // X-rays
}

// amplitude is the site's coherent amplitude at |Q|: b in fm for
// neutrons, f(|Q|) in electrons for X-rays.
func (s SiteScatterer) amplitude(p Probe, qInvA float64) float64 {
	if p == XRay {
		return s.FormFactor.At(qInvA)
	}
	return s.CoherentFm
}

// Axis is a uniform axis of energy transfer E (positive: the sample gains
// a phonon, the neutron or photon loses energy): samples Min + i·Step, in
// Unit (meV by default; THz and cm⁻¹ as energies hν and hν/hc). Min = Max
// = 0 asks for a window from the modes (from 0 to 15 % above the highest
// mode); Step = 0 for DefaultAxisSamples − 1 steps.
type Axis struct {
	Min, Max, Step float64
	Unit           physics.Unit
}

// Axis limits.
const (
	DefaultAxisSamples = 201
	MaxAxisSamples     = 100_000
	// MaxEnergy bounds |Min|, |Max|, Step and every FWHM in any unit
	// (far above any phonon, low enough that no sum overflows).
	MaxEnergy = 1e9
	// MinEnergy bounds Step and every FWHM from below in any unit: far
	// below any instrument's resolution, and far enough from the smallest
	// floating-point numbers that a Gaussian's 1/σ and σ² neither overflow
	// nor underflow. The window chosen from the modes is at least
	// (DefaultAxisSamples − 1)·MinEnergy wide.
	MinEnergy = 1e-12
)

// mevPer is how many meV one unit of u is (energy hν for THz and cm⁻¹).
func mevPer(u physics.Unit) float64 { return physics.MeV.PerTHz() / u.PerTHz() }

// Samples returns the number of samples of a with Min < Max and Step > 0.
func (a Axis) samples() int { return int(math.Round((a.Max-a.Min)/a.Step)) + 1 }

// Energies returns the sample energies in the axis unit.
func (a Axis) Energies() []float64 {
	n := a.samples()
	out := make([]float64, n)
	for i := range out {
		out[i] = a.Min + float64(i)*a.Step
	}
	return out
}

// Resolution is the instrument's Gaussian resolution: in energy, a FWHM
// polynomial in the energy transfer, FWHM(E) = Σ_i FWHM[i]·Eⁱ (E and FWHM
// in the axis unit; one number is a constant width; at most four), taken
// at the line's energy clamped into the axis window; empty means a
// constant 2 × Step. QFWHM (Å⁻¹, powder maps only) is a constant Gaussian
// FWHM in |Q|, 0 for none.
type Resolution struct {
	FWHM  []float64
	QFWHM float64
}

// MaxFWHMTerms is the longest FWHM polynomial (a cubic).
const MaxFWHMTerms = 4

// fwhmAt evaluates the FWHM polynomial at e (axis unit), clamped into
// [lo, hi].
func (r Resolution) fwhmAt(e, lo, hi float64) float64 {
	e = min(max(e, lo), hi)
	v := 0.0
	for i := len(r.FWHM) - 1; i >= 0; i-- {
		v = v*e + r.FWHM[i]
	}
	return v
}

// checkFWHM adds a violation when the FWHM polynomial is not positive and
// finite everywhere on [lo, hi]: at the ends and at its stationary points
// inside (a cubic has at most two).
func (r Resolution) checkFWHM(vs *physics.Violations, lo, hi float64) {
	for i, c := range r.FWHM {
		if !(math.Abs(c) <= MaxEnergy) {
			vs.Add(fmt.Sprintf("resolution.fwhm[%d]", i), "must be a finite number within ±%g, got %v", MaxEnergy, c)
			return
		}
	}
	pts := []float64{lo, hi}
	c := append(append([]float64(nil), r.FWHM...), 0, 0, 0, 0)
	// derivative c1 + 2c2 e + 3c3 e²
	a, b, d := 3*c[3], 2*c[2], c[1]
	switch {
	case a != 0:
		if disc := b*b - 4*a*d; disc >= 0 {
			s := math.Sqrt(disc)
			pts = append(pts, (-b+s)/(2*a), (-b-s)/(2*a))
		}
	case b != 0:
		pts = append(pts, -d/b)
	}
	for _, e := range pts {
		if e < lo || e > hi {
			continue
		}
		if w := r.fwhmAt(e, lo, hi); !(w >= MinEnergy) || w > MaxEnergy {
			vs.Add("resolution.fwhm", "the FWHM must be at least %g and at most %g over the energy window %v…%v; it is %v at E = %v", MinEnergy, MaxEnergy, lo, hi, w, e)
			return
		}
	}
}
