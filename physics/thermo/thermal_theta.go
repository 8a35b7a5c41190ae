package thermo

import (
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
)

// ThetaStatus says whether ThermalPoint.ThetaDK holds a Debye temperature
// and, if not, why. A reader must check it before using ThetaDK.
type ThetaStatus int

// Debye temperature statuses. The zero value is ThetaUndefined.
const (
	// ThetaUndefined: no θ_D (no modes summed, or T = 0 without an elastic
	// θ_D); ThetaDK is 0.
	ThetaUndefined ThetaStatus = iota
	// ThetaDetermined: ThetaDK is θ_D(T), with an estimated error below
	// ThetaRelTol relative to the infinite crystal's.
	ThetaDetermined
	// ThetaElasticLimit: T = 0, where θ_D(T) is defined only as a limit;
	// ThetaDK is the elastic θ_D (ThermalResult.ThetaElasticK), the T → 0
	// limit of θ_D(T) of the bulk crystal.
	ThetaElasticLimit
	// ThetaGridTooCoarse: the grid (or finite crystal) does not resolve the
	// modes that are thermally populated at T; ThetaDK is 0.
	ThetaGridTooCoarse
	// ThetaIllConditioned: the heat capacity per mode is so close to 0 or
	// to its classical value that the Debye inversion cannot determine θ;
	// ThetaDK is 0.
	ThetaIllConditioned
)

func (s ThetaStatus) String() string {
	switch s {
	case ThetaUndefined:
		return "undefined"
	case ThetaDetermined:
		return "determined"
	case ThetaElasticLimit:
		return "elastic-limit"
	case ThetaGridTooCoarse:
		return "grid-too-coarse"
	case ThetaIllConditioned:
		return "ill-conditioned"
	}
	return fmt.Sprintf("ThetaStatus(%d)", int(s))
}

// Criteria for reporting θ_D(T).
const (
	// ThetaRelTol is the largest estimated relative error of a reported
	// θ_D(T).
	ThetaRelTol = 0.01
	// thetaMaxX is the largest x₁ = hν₁/k_BT, ν₁ the lowest mode summed,
	// at which a mode sum resolves the thermal modes. Σ_branches c(hν/kT)
	// (c the Einstein heat capacity x²eˣ/(eˣ−1)² = x²/(4 sinh²(x/2)), even
	// in ν and so analytic in ν² and in q) is a smooth periodic function of
	// q, so its grid sum converges exponentially: for acoustic ν = v|q|/2π
	// the nearest singularity (poles of c at x = ±2πi) lies 2π/x₁ grid steps
	// from the real axis, and the aliasing error is about e^(−4π²/x₁):
	// 5e-5 at x₁ = 4 (trapezoid rule for analytic periodic functions;
	// Trefethen & Weideman, SIAM Review 56, 385 (2014)). Above it the grid
	// holds no populated mode at all and θ_D(T) grows without bound as T
	// falls (its Cv is that of the lowest grid shell, ∝ e^(−x₁)).
	thetaMaxX = 4.0
	// thetaMaxXDOS is x₁'s limit on the DOS route: the tetrahedron DOS
	// below the first grid shell comes from tetrahedra touching Γ, whose
	// linear interpolation of ν lies above the true, convex |q| dependence,
	// so it undercounts the acoustic states there: the fcc example's θ_D(T)
	// on that route tends to 370 K instead of the elastic 314.6 K (+18 %)
	// as T → 0 on any grid, and is within 1 % of the mode sum only for
	// x₁ ≤ 1 (measured on 32³ and 64³ grids: 1.0–1.3 % off at x₁ = 1.47).
	thetaMaxXDOS = 1.0
	// thetaMaxBinX bounds the DOS route's bin width in units of k_BT/h:
	// the midpoint rule then integrates the ν^(d−1) low-frequency DOS
	// against c(x) to well under 1 % (common practice).
	thetaMaxBinX = 0.5
	// thetaRoundRel is the relative rounding error allowed for the heat
	// capacity sums (the series evaluation matches the direct sum to 1e-11,
	// TestSeriesMatchesDirect).
	thetaRoundRel = 1e-11
)

// thetaInput is what the θ_D(T) decision needs at one temperature.
type thetaInput struct {
	dim          int
	tempK        float64 // > 0
	c            float64 // heat capacity per mode summed, k_B
	modesPerCell float64 // weight of the modes summed
	zeroWeight   float64 // weight of the Γ acoustic (and zero) modes left out
	nuLowTHz     float64 // lowest grid mode summed (either route), THz
	binTHz       float64 // DOS route: bin width, THz; 0 on the mode sum
	finite       bool    // a finite crystal: its modes are all there are
}

// debyeThetaChecked returns θ_D(T) with its status, or 0 with the status
// and a reason when the grid cannot determine it.
//
// Two errors are estimated against the infinite crystal. (1) Resolution:
// x₁ = hν₁/k_BT ≤ thetaMaxX (thetaMaxXDOS on the DOS route), see thetaMaxX.
// (2) The modes left out: the p acoustic modes at Γ carry the weight w₀ of
// the cell of q-space around Γ, whose modes are classical (c = 1) when (1)
// holds, so leaving them out shifts the heat capacity per mode by
// δc = (w₀/M)(1 − c), M the weight summed; a finite crystal has no such
// error (its translations are not vibrations). The Debye inversion turns
// δc into δθ/θ = δc/|x c_D′(x)|, x = θ/T, c_D the Debye heat capacity per
// mode: 1/d times δc/c in the T^d regime, (δc/c)/(2(1 − c)) near the
// classical limit. Rounding of the sums (thetaRoundRel·c) is propagated the
// same way: near c = 1 it makes θ ill-conditioned. Both must stay below
// ThetaRelTol.
func debyeThetaChecked(in thetaInput) (float64, ThetaStatus, string) {
	if !(in.modesPerCell > 0) {
		return 0, ThetaUndefined, "no modes to sum"
	}
	kT := in.tempK / physics.THzToKelvin // k_BT/h, THz
	x1 := in.nuLowTHz / kT
	what := "grid"
	if in.finite {
		what = "finite crystal"
	}
	maxX := thetaMaxX
	if in.binTHz > 0 {
		maxX = thetaMaxXDOS
	}
	if x1 > maxX {
		return 0, ThetaGridTooCoarse, fmt.Sprintf(
			"%s too coarse for %.4g K: its lowest mode, %.4g THz, is %.3g k_BT/h (at most %g resolves the thermal modes; about %.2g times as many points per direction would)",
			what, in.tempK, in.nuLowTHz, x1, maxX, x1/maxX)
	}
	if xb := in.binTHz / kT; xb > thetaMaxBinX {
		return 0, ThetaGridTooCoarse, fmt.Sprintf(
			"DOS bins too wide for %.4g K: %.3g k_BT/h (at most %g; use the mode sum)", in.tempK, xb, thetaMaxBinX)
	}
	c := in.c
	if !(c > 0) || !(c < 1) {
		return 0, ThetaIllConditioned, fmt.Sprintf(
			"heat capacity per mode %.6g k_B is not inside (0, 1): no Debye model has it", c)
	}
	theta := debyeTheta(in.dim, in.tempK, c)
	if !(theta > 0) {
		return 0, ThetaIllConditioned, fmt.Sprintf("heat capacity per mode %.6g k_B: the Debye inversion has no root", c)
	}
	slope := debyeLogSlope(in.dim, theta/in.tempK)
	if e := thetaRoundRel * c / slope; !(e <= ThetaRelTol) {
		return 0, ThetaIllConditioned, fmt.Sprintf(
			"heat capacity per mode 1 − %.3g k_B, so close to the classical limit that rounding alone makes θ_D uncertain by %.2g %%",
			1-c, 100*e)
	}
	if !in.finite {
		if e := in.zeroWeight / in.modesPerCell * (1 - c) / slope; !(e <= ThetaRelTol) {
			return 0, ThetaGridTooCoarse, fmt.Sprintf(
				"grid too coarse for %.4g K: the acoustic modes at Γ left out of the sums make θ_D uncertain by about %.2g %% (at most %g %%); a finer grid is needed",
				in.tempK, 100*e, 100*ThetaRelTol)
		}
	}
	return theta, ThetaDetermined, ""
}

// debyeLogSlope is |x c_D′(x)| for the d-dimensional Debye heat capacity
// per mode c_D (debyeHeatCapacity), by a central difference in ln x (step
// 1e-3: truncation ~1e-7 relative, rounding ≤ 1e-13/slope).
func debyeLogSlope(d int, x float64) float64 {
	const h = 1e-3
	return math.Abs(debyeHeatCapacity(d, x*math.Exp(h))-debyeHeatCapacity(d, x*math.Exp(-h))) / (2 * h)
}
