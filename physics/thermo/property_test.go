// Property-based tests: invariants that every valid model must satisfy,
// checked on random models (1–8 sites, 1–3 dimensions, springs over six
// orders of magnitude) drawn from fixed seeds. A failure prints the seed and
// the model so that it can be reproduced. More models:
//
//	go test -run TestProperty ./physics/thermo -args -props.n=500

package thermo

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// gammaWeight is the weight of the p acoustic zero modes at Γ on a
// Γ-centred grid of N points: p/N modes per cell. They are the only modes
// a rigid model leaves out of the thermal sums.
func gammaWeight(pc *testmodels.PropCase) float64 {
	return float64(pc.M.Polarizations()) / float64(pc.Spec.Count())
}

// TestPropertyDOSNormalization: the density of states integrates to
// p × sites states per cell, the number of modes per cell (Ashcroft &
// Mermin, Solid State Physics, ch. 23: g(ν) counts the 3r modes of each
// wavevector), for tetrahedra on the default window (bins from −Step/2,
// holding the whole spectrum: exact to rounding, 1e-9) and for Gaussians
// on a window reaching 9 widths beyond every mode (the engine cuts its
// Gaussians at 8 widths; the cut tail is 6e-16, the tabulated normal CDF is
// good to 5e-12: 1e-9). Per-site projections: each site's DOS integrates
// to p and the sites sum to the total of the plain (unprojected)
// computation at every sample, to 1e-9 of its peak — completeness of the
// eigenvectors of the Hermitian D(q), Σ_k |e_k⟩⟨e_k| = 1, whose site-s
// block has trace p (linear algebra; common practice).
func TestPropertyDOSNormalization(t *testing.T) {
	ctx := testmodels.Ctx(t)
	for _, pc := range testmodels.PropCases(t) {
		g, err := pc.M.GridModes(ctx, pc.Spec, physics.GridOptions{Projections: true})
		if err != nil {
			t.Fatalf("%v\n%v", err, pc)
		}
		want := float64(pc.M.Polarizations() * pc.M.Sites())
		for _, method := range []spectra.DOSMethod{spectra.Tetrahedron, spectra.Gaussian} {
			opt := spectra.DOSOptions{Method: method}
			if method == spectra.Gaussian {
				// Any width will do; a fiftieth of the top is between the
				// defaults of the 1D and 3D grids here.
				top := testmodels.MaxAbs(g.FreqTHz)
				opt.Width = top / 50
				opt.Min, opt.Max = -9*opt.Width, top+9*opt.Width
			}
			plain := mustDOS(t, pc.M, g, opt)
			if got := testmodels.StepIntegral(plain.Freq, plain.DOS); math.Abs(got-want) > 1e-9*want {
				t.Errorf("%v: ∫g = %.12g states per cell; want p × sites = %g\n%v", method, got, want, pc)
			}
			opt.PerSite = true
			proj := mustDOS(t, pc.M, g, opt)
			peak := testmodels.MaxAbs(plain.DOS)
			sum := make([]float64, len(plain.DOS))
			for s, d := range proj.Sites {
				if got := testmodels.StepIntegral(proj.Freq, d); math.Abs(got-float64(pc.M.Polarizations())) > 1e-9*want {
					t.Errorf("%v: site %d integrates to %.12g; want p = %d\n%v", method, s, got, pc.M.Polarizations(), pc)
				}
				for i, x := range d {
					sum[i] += x
				}
			}
			for i := range sum {
				if math.Abs(sum[i]-plain.DOS[i]) > 1e-9*peak {
					t.Errorf("%v: at %g THz Σ sites = %.12g, total %.12g\n%v", method, plain.Freq[i], sum[i], plain.DOS[i], pc)
					break
				}
			}
		}
	}
}

// propTemps is a ladder of temperatures from 0 to MaxTempK with a few
// random ones and those at hν_top/kT = 8, 2, 0.5.
func propTemps(rng *rand.Rand, topTHz float64) []float64 {
	temps := []float64{0, 1, 10, 100, 1000, 1e4, 1e5, MaxTempK}
	for i := 0; i < 4; i++ {
		temps = append(temps, math.Pow(10, 6*rng.Float64()))
	}
	for _, x := range []float64{8, 2, 0.5} {
		temps = append(temps, math.Min(MaxTempK, topTHz*physics.THzToKelvin/x))
	}
	return temps
}

// TestPropertyThermalLimits: on both thermal routes, at every temperature,
// F = U − TS (the definition of the Helmholtz free energy; Callen,
// Thermodynamics, ch. 5) to 1e-12 of the largest term, S ≥ 0 and
// 0 ≤ Cv ≤ p·k_B per site per cell (each mode's Einstein function
// x²eˣ/(eˣ−1)² lies in (0, 1]; Einstein 1907, Ashcroft & Mermin ch. 23).
// At 10⁶ K the mode sum reaches the classical limit, k_B per mode summed
// (equipartition; Dulong–Petit): with x = hν/kT the Einstein function is
// 1 − x²/12 + x⁴/240 − … (its Taylor series, alternating with falling
// terms for x < 1), so Cv/k_B lies between (p·sites − p/N)(1 − x_top²/12)
// and p·sites − p/N, p/N being the weight of the acoustic zero modes at Γ,
// the only modes a rigid model leaves out.
func TestPropertyThermalLimits(t *testing.T) {
	ctx := testmodels.Ctx(t)
	for _, pc := range testmodels.PropCases(t) {
		g, err := pc.M.GridModes(ctx, pc.Spec, physics.GridOptions{})
		if err != nil {
			t.Fatalf("%v\n%v", err, pc)
		}
		top := testmodels.MaxAbs(g.FreqTHz)
		temps := propTemps(testmodels.PropRNG(pc.Seed), top)
		states := float64(pc.M.Polarizations() * pc.M.Sites())
		for _, route := range []ThermalRoute{ModeSum, DOSIntegral} {
			r, err := ComputeThermal(ctx, pc.M, g, ThermalOptions{TempsK: temps, Route: route})
			if err != nil {
				t.Fatalf("%v: %v\n%v", route, err, pc)
			}
			for _, p := range r.Points {
				ts := p.TempK * p.SeVPerK
				if d := p.FeV - (p.UeV - ts); math.Abs(d) > 1e-12*math.Max(math.Abs(p.UeV), ts) {
					t.Errorf("%v T=%g K: F − (U − TS) = %.3g eV (U %g, TS %g)\n%v", route, p.TempK, d, p.UeV, ts, pc)
				}
				if p.SeVPerK < 0 || p.CveVPerK < 0 {
					t.Errorf("%v T=%g K: S = %g, Cv = %g eV/K; want ≥ 0\n%v", route, p.TempK, p.SeVPerK, p.CveVPerK, pc)
				}
				if c := p.CveVPerK / physics.BoltzmannEVPerK; c > states*(1+1e-10) {
					t.Errorf("%v T=%g K: Cv = %.15g k_B per cell; want ≤ p × sites = %g\n%v", route, p.TempK, c, states, pc)
				}
			}
			if route != ModeSum {
				continue
			}
			hot := r.Points[7] // MaxTempK
			x := top * physics.THzToKelvin / hot.TempK
			summed := states - gammaWeight(pc)
			c := hot.CveVPerK / physics.BoltzmannEVPerK
			if lo := summed * (1 - x*x/12); c < lo*(1-1e-12) || c > summed*(1+1e-12) {
				t.Errorf("Cv at %g K = %.12g k_B per cell; want within [%.12g, %.12g] (classical limit, x_top = %.3g)\n%v",
					hot.TempK, c, lo, summed, x, pc)
			}
		}
	}
}

// supDeriv returns sup |f′| and sup |f″| of f over x in (0, 60] by
// central differences on a fine grid (step 1e-3), with 1 % added: the
// constants of the interpolation and quadrature error bounds below,
// derived here rather than taken from a table.
func supDeriv(f func(x float64) float64) (d1, d2 float64) {
	const h = 1e-3
	for x := 2 * h; x <= 60; x += h {
		a, b, c := f(x-h), f(x), f(x+h)
		d1 = math.Max(d1, math.Abs(c-a)/(2*h))
		d2 = math.Max(d2, math.Abs(c-2*b+a)/(h*h))
	}
	return 1.01 * d1, 1.01 * d2
}

// einsteinC is the Einstein function x²eˣ/(eˣ−1)² = (x/2)²/sinh²(x/2):
// heat capacity of one mode in units of k_B.
func einsteinC(x float64) float64 {
	if x < 1e-8 {
		return 1
	}
	y := x / 2
	return y * y / (math.Sinh(y) * math.Sinh(y))
}

// einsteinU is the energy of one mode, zero point included, in units of
// k_B·T: (x/2) coth(x/2).
func einsteinU(x float64) float64 {
	if x < 1e-8 {
		return 1
	}
	return x / 2 / math.Tanh(x/2)
}

// branchSpread returns, per branch (modes in ascending order), the largest
// difference of its frequencies (THz) between two points of one grid cell
// (index offsets in {−1, 0, 1}^d, periodic): the spread of the corner
// values of any simplex the tetrahedron method interpolates.
func branchSpread(g *physics.GridModes, dim int) []float64 {
	n := g.Spec.Mesh
	nm := g.NModes
	out := make([]float64, nm)
	idx := func(a, b, c int) int {
		return ((a+n[0])%n[0]*n[1]+(b+n[1])%n[1])*n[2] + (c+n[2])%n[2]
	}
	var r [3]int
	for k := 0; k < dim; k++ {
		r[k] = 1
	}
	for a := 0; a < n[0]; a++ {
		for b := 0; b < n[1]; b++ {
			for c := 0; c < n[2]; c++ {
				i := idx(a, b, c)
				for da := -r[0]; da <= r[0]; da++ {
					for db := -r[1]; db <= r[1]; db++ {
						for dc := -r[2]; dc <= r[2]; dc++ {
							j := idx(a+da, b+db, c+dc)
							for k := 0; k < nm; k++ {
								out[k] = math.Max(out[k], math.Abs(g.FreqTHz[i*nm+k]-g.FreqTHz[j*nm+k]))
							}
						}
					}
				}
			}
		}
	}
	return out
}

// TestPropertyThermalRoutes: the DOS route (the linear-simplex DOS of the
// grid, integrated by the midpoint rule on dosRouteBins bins) and the mode
// sum over the same grid agree within bounds derived from how the DOS
// route is built, and the mode sum of Cv equals the integral of Cv
// weighted by the exact discrete DOS of a finite crystal.
//
//   - Zero-point energy: the integral of ν over the linear-simplex DOS is
//     the grid mean of ν exactly (a linear function's mean over a simplex
//     is the mean of its corners, and every grid point is a corner of
//     equally many simplices; Blöchl, Jepsen & Andersen, Phys. Rev. B 49,
//     16223 (1994)); the midpoint rule moves each state by at most half a
//     bin h, so |ZPE_dos − ZPE_sum| ≤ (h_P/2)(h/2)·p·sites.
//   - U and Cv at temperatures where hν_top/kT = 8, 2, 0.5: for a mode
//     function f(ν) (energy ε = kT·(x/2)coth(x/2), heat capacity
//     k_B·E(x)), the integral of f(ν(q)) over a simplex on which ν is
//     linear differs from the mean of its corner values by at most
//     ½ sup|f″|·Δ² (Taylor's theorem about the point, the corners' spread
//     Δ bounding |ν_i − ν(q)|; common practice in interpolation error
//     analysis), and the midpoint rule adds at most sup|f′|·h/2 per state.
//     The corner means sum to the grid mean of f including the acoustic
//     modes at Γ (f(0) = kT, k_B), which the mode sum leaves out: so
//     |X_dos − X_sum − f(0)·p/N| ≤ Σ_b ½ sup|f″|·Δ_b² + sup|f′|·(h/2)·p·sites.
//   - Finite crystal, histogram DOS (its exact discrete spectrum, doc.go)
//     on bins of 1/20000 of the top: Σ_i c(ν_i)·g_i·Step minus the Γ
//     modes' k_B·p/N equals the mode sum of Cv within
//     sup|c′|·(Step/2)·p·sites (each state displaced by at most half a
//     bin).
func TestPropertyThermalRoutes(t *testing.T) {
	ctx := testmodels.Ctx(t)
	e1, e2 := supDeriv(einsteinC) // of E(x)
	u1, u2 := supDeriv(einsteinU) // of (x/2)coth(x/2)
	kB := physics.BoltzmannEVPerK
	worst := map[string]float64{} // largest difference / bound, for -v
	defer func() { t.Logf("largest difference as a fraction of its bound: %v", worst) }()
	for _, pc := range testmodels.PropCases(t) {
		g, err := pc.M.GridModes(ctx, pc.Spec, physics.GridOptions{})
		if err != nil {
			t.Fatalf("%v\n%v", err, pc)
		}
		top := testmodels.MaxAbs(g.FreqTHz)
		states := float64(pc.M.Polarizations() * pc.M.Sites())
		gw := gammaWeight(pc)
		var temps []float64
		for _, x := range []float64{8, 2, 0.5} {
			temps = append(temps, top*physics.THzToKelvin/x)
		}
		sum := mustThermal(t, pc.M, g, ThermalOptions{TempsK: temps})
		dos := mustThermal(t, pc.M, g, ThermalOptions{TempsK: temps, Route: DOSIntegral})
		bin := top / dosRouteBins * (1 + 1e-9)

		d, tol := math.Abs(dos.ZPEeV-sum.ZPEeV), physics.THzToEV/2*bin/2*states+1e-12*sum.ZPEeV
		worst["ZPE"] = math.Max(worst["ZPE"], d/tol)
		if d > tol {
			t.Errorf("ZPE: DOS route %.12g eV, mode sum %.12g eV; differ by %.3g, bound %.3g\n%v", dos.ZPEeV, sum.ZPEeV, d, tol, pc)
		}
		spread := branchSpread(g, pc.M.Dim())
		var spread2 float64
		for _, s := range spread {
			spread2 += s * s
		}
		for i, tK := range temps {
			kT := kB * tK
			kappa := physics.THzToKelvin / tK // h/kT, 1/THz
			for _, c := range []struct {
				name         string
				dos, sum, f0 float64
				sup1, sup2   float64 // sup |f′|, |f″| per THz, per THz²
			}{
				{"U", dos.Points[i].UeV, sum.Points[i].UeV, kT, kT * kappa * u1, kT * kappa * kappa * u2},
				{"Cv", dos.Points[i].CveVPerK, sum.Points[i].CveVPerK, kB, kB * kappa * e1, kB * kappa * kappa * e2},
			} {
				want := c.sum + c.f0*gw
				tol := 0.5*c.sup2*spread2 + c.sup1*bin/2*states + 1e-12*math.Abs(want)
				d := math.Abs(c.dos - want)
				worst[c.name] = math.Max(worst[c.name], d/tol)
				if d > tol {
					t.Errorf("T=%.4g K (hν_top/kT = %.3g) %s: DOS route %.12g, mode sum + Γ %.12g; differ by %.3g, bound %.3g\n%v",
						tK, top*kappa, c.name, c.dos, want, d, tol, pc)
				}
			}
		}
		worst["finite Cv"] = math.Max(worst["finite Cv"], checkFiniteHistogram(t, pc, e1))
	}
}

// checkFiniteHistogram is the finite-crystal part of
// TestPropertyThermalRoutes. It returns the largest difference as a
// fraction of its bound.
func checkFiniteHistogram(t *testing.T, pc *testmodels.PropCase, e1 float64) float64 {
	t.Helper()
	spec := pc.Spec
	spec.Finite = true
	g := testmodels.Modes(t, pc.M, spec, physics.GridOptions{})
	top := testmodels.MaxAbs(g.FreqTHz)
	step := top / 20000
	h := mustDOS(t, pc.M, g, spectra.DOSOptions{Method: spectra.Histogram, Min: 0, Max: 1.0001 * top, Step: step})
	states := float64(pc.M.Polarizations() * pc.M.Sites())
	var temps []float64
	for _, x := range []float64{8, 2, 0.5} {
		temps = append(temps, top*physics.THzToKelvin/x)
	}
	r := mustThermal(t, pc.M, g, ThermalOptions{TempsK: temps})
	worst := 0.0
	for i, tK := range temps {
		kappa := physics.THzToKelvin / tK
		var integ float64
		for j, f := range h.Freq {
			integ += einsteinC(math.Max(f, 0)*kappa) * h.DOS[j] * step
		}
		integ -= gammaWeight(pc) // the acoustic modes at Γ, c(0) = k_B each
		got := r.Points[i].CveVPerK / physics.BoltzmannEVPerK
		tol := kappa*e1*step/2*states + 1e-9*states
		worst = math.Max(worst, math.Abs(integ-got)/tol)
		if math.Abs(integ-got) > tol {
			t.Errorf("finite crystal, T=%.4g K: Cv mode sum %.12g k_B, ∫c·g − Γ %.12g k_B; differ by %.3g, bound %.3g\n%v",
				tK, got, integ, math.Abs(integ-got), tol, pc)
		}
	}
	return worst
}
