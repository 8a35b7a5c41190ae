package qha_test

import (
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/thermo/qha"
)

// bmEnergy is the third-order Birch–Murnaghan energy in its usual form
// (Birch, Phys. Rev. 71, 809 (1947)):
// E = E0 + (9V0B0/16){[η−1]³B0' + [η−1]²[6 − 4η]}, η = (V0/V)^(2/3).
func bmEnergy(e0, v0, b0, bp, v float64) float64 {
	eta := math.Pow(v0/v, 2.0/3)
	return e0 + 9*v0*b0/16*(math.Pow(eta-1, 3)*bp+(eta-1)*(eta-1)*(6-4*eta))
}

// vinetEnergy is the Vinet energy (Vinet, Ferrante, Rose & Smith, J.
// Geophys. Res. 92, 9319 (1987)), written out here independently of the
// package: E = E0 + 2B0V0/(B0'−1)² {2 − [5 + 3B0'(x−1) − 3x] e^(−(3/2)(B0'−1)(x−1))},
// x = (V/V0)^(1/3).
func vinetEnergy(e0, v0, b0, bp, v float64) float64 {
	x := math.Cbrt(v / v0)
	return e0 + 2*b0*v0/((bp-1)*(bp-1))*(2-(5+3*bp*(x-1)-3*x)*math.Exp(-1.5*(bp-1)*(x-1)))
}

// Fits of exact equation-of-state data give back their parameters: for
// each form, energies at 7 volumes within ±8 % of V0 from the closed form
// above; the fit of the same form must return E0, V0, B0, B0' (B0 as
// V d²E/dV² at V0, B0' = dB/dP there, both computed by the package from
// the fitted curve) and residuals at rounding.
func TestEOSFitRecoversParameters(t *testing.T) {
	const e0, v0, b0, bp = -12.3, 27.0, 0.6, 4.7
	for _, tc := range []struct {
		kind qha.EOS
		e    func(e0, v0, b0, bp, v float64) float64
	}{{qha.BirchMurnaghan, bmEnergy}, {qha.Vinet, vinetEnergy}} {
		t.Run(tc.kind.String(), func(t *testing.T) {
			var v, e []float64
			for i := -3; i <= 3; i++ {
				x := v0 * (1 + 0.027*float64(i))
				v = append(v, x)
				e = append(e, tc.e(e0, v0, b0, bp, x))
			}
			f, err := qha.FitEOS(tc.kind, v, e)
			if err != nil {
				t.Fatal(err)
			}
			for _, c := range []struct {
				name      string
				got, want float64
				tol       float64
			}{
				{"E0", f.E0eV, e0, 1e-9}, {"V0", f.V0A3, v0, 1e-7}, {"B0", f.B0eVA3, b0, 1e-6}, {"B0'", f.B0p, bp, 1e-4},
			} {
				if rel(c.got, c.want) > c.tol {
					t.Errorf("%s = %.10g, want %.10g", c.name, c.got, c.want)
				}
			}
			if f.RMSeV > 1e-9 {
				t.Errorf("RMS residual %g eV, want rounding", f.RMSeV)
			}
			if got := f.BulkModulus(v0); rel(got, b0) > 1e-6 {
				t.Errorf("B(V0) = %g, want %g", got, b0)
			}
		})
	}
}

// The quasi-harmonic checks on the crystal whose springs all scale as
// k ∝ V^(−s) (γ = s/2 for every mode, TestGammaPowerLawClosedForm):
//
//   - every frequency is ν(V) = ν(V0)(V/V0)^(−γ), so F_vib depends on V and
//     T only through T V^γ, and the thermodynamic γ = α B_T V/Cv equals the
//     mode γ at every temperature (the Mie–Grüneisen relation; Ashcroft &
//     Mermin ch. 25, derived from F_vib(T V^γ)): here within the fits'
//     accuracy;
//   - Cp − Cv = α² B_T V T identically (the package builds Cp from it), and
//     independently Cp = T (∂S/∂T)_P by a difference quotient of S along the
//     isobar (S interpolated at V(T ± h));
//   - α = (1/V)(∂V/∂T)_P: the Maxwell-relation α against a difference
//     quotient of V(T);
//   - α → 0 as T → 0 (third law: S → 0 at every volume): α(0) = 0 and
//     α(2 K)/α(300 K) below 1e-4.
func TestQHAPowerLawCrystal(t *testing.T) {
	const s = 3.0
	dx := []float64{-0.03, -0.02, -0.01, 0, 0.01, 0.02, 0.03}
	ms := powerLawSet(t, 3, s, dx)
	set := mustSet(t, ms, -1)
	static := make([]float64, len(ms))
	for i, m := range ms {
		lat := m.Lattice()
		static[i] = bmEnergy(-5, 27, 0.5, 4.5, lat[0][0]*lat[1][1]*lat[2][2])
	}
	const h = 0.5 // K, the difference quotients' step
	temps := []float64{0, 2, 100, 100 + h, 100 - h, 300, 300 + h, 300 - h, 600, 600 + h, 600 - h}
	res, err := qha.Compute(ctx(t), set, static, qha.Options{Grid: mesh.GridSpec{Mesh: [3]int{12, 12, 12}}, TempsK: temps, EOS: qha.Vinet})
	if err != nil {
		t.Fatal(err)
	}
	for i, p := range res.Points {
		if !p.Found || !p.Bracketed || p.Warning != "" {
			t.Fatalf("T = %g K: found %v bracketed %v: %s", temps[i], p.Found, p.Bracketed, p.Warning)
		}
		if d := p.CpeVPerK - p.CveVPerK - p.AlphaVolPerK*p.AlphaVolPerK*p.BulkModulusGPa/qha.EVPerA3ToGPa*p.VolumeA3*p.TempK; math.Abs(d) > 1e-15 {
			t.Errorf("T = %g K: Cp − Cv − α²BVT = %g eV/K", p.TempK, d)
		}
	}
	if a := res.Points[0].AlphaVolPerK; a != 0 {
		t.Errorf("α(0 K) = %g, want 0", a)
	}
	if r := res.Points[1].AlphaVolPerK / res.Points[5].AlphaVolPerK; !(math.Abs(r) < 1e-4) {
		t.Errorf("α(2 K)/α(300 K) = %g, want → 0", r)
	}
	for _, c := range []int{2, 5, 8} {
		p, up, down := res.Points[c], res.Points[c+1], res.Points[c+2]
		t.Logf("T = %g K: V = %.5f Å³, B_T = %.2f GPa, α = %.4e /K, Cv = %.5e, Cp = %.5e eV/K, γ = %.5f, fit RMS %.2g eV, S fit RMS %.2g eV/K",
			p.TempK, p.VolumeA3, p.BulkModulusGPa, p.AlphaVolPerK, p.CveVPerK, p.CpeVPerK, p.Gamma, p.Fit.RMSeV, p.EntropyRMS)
		if math.Abs(p.Gamma-s/2) > 0.005*s/2 {
			t.Errorf("T = %g K: thermodynamic γ = %.6f, want the mode γ s/2 = %g within 0.5 %%", p.TempK, p.Gamma, s/2)
		}
		alphaNum := (up.VolumeA3 - down.VolumeA3) / (2 * h) / p.VolumeA3
		if rel(alphaNum, p.AlphaVolPerK) > 0.01 {
			t.Errorf("T = %g K: α = %.6e, (1/V)dV/dT = %.6e", p.TempK, p.AlphaVolPerK, alphaNum)
		}
		sAt := func(q qha.Point, k int) float64 { return entropyAt(t, res, k, q.VolumeA3) }
		cpNum := p.TempK * (sAt(up, c+1) - sAt(down, c+2)) / (2 * h)
		if rel(cpNum, p.CpeVPerK) > 0.005 {
			t.Errorf("T = %g K: Cp = %.6e, T(∂S/∂T)_P = %.6e eV/K", p.TempK, p.CpeVPerK, cpNum)
		}
		t.Logf("T = %g K: α against (1/V)dV/dT: %.2g relative; Cp against T(∂S/∂T)_P: %.2g relative", p.TempK, rel(alphaNum, p.AlphaVolPerK), rel(cpNum, p.CpeVPerK))
		if p.CpeVPerK <= p.CveVPerK {
			t.Errorf("T = %g K: Cp %g ≤ Cv %g", p.TempK, p.CpeVPerK, p.CveVPerK)
		}
	}
}

// entropyAt interpolates S(V, T_k) at volume v by the Lagrange polynomial
// through the volumes' harmonic entropies (an interpolation independent of
// the package's least-squares fit).
func entropyAt(t *testing.T, res *qha.Result, k int, v float64) float64 {
	t.Helper()
	var s float64
	for i, vi := range res.VolumesA3 {
		w := 1.0
		for j, vj := range res.VolumesA3 {
			if j != i {
				w *= (v - vj) / (vi - vj)
			}
		}
		s += w * res.Thermal[i].Points[k].SeVPerK
	}
	return s
}

// Volumes that all lie on one side of the minimum: the point is flagged
// (not bracketed, with a warning), never passed off silently.
func TestQHAFlagsUnbracketedMinimum(t *testing.T) {
	ms := powerLawSet(t, 3, 3, []float64{0.02, 0.03, 0.04, 0.05, 0.06})
	static := make([]float64, len(ms))
	for i, m := range ms {
		lat := m.Lattice()
		static[i] = bmEnergy(-5, 27, 0.5, 4.5, lat[0][0]*lat[1][1]*lat[2][2])
	}
	res, err := qha.Compute(ctx(t), mustSet(t, ms, -1), static, qha.Options{Grid: mesh.GridSpec{Mesh: [3]int{4, 4, 4}}, TempsK: []float64{10}, EOS: qha.BirchMurnaghan})
	if err != nil {
		t.Fatal(err)
	}
	p := res.Points[0]
	if p.Bracketed || p.Warning == "" || res.Unbracketed != 1 {
		t.Fatalf("point %+v not flagged", p)
	}
	t.Log(p.Warning)
}

func TestQHARefusesBadInput(t *testing.T) {
	ms := powerLawSet(t, 3, 3, []float64{-0.02, -0.01, 0, 0.01})
	_, err := qha.Compute(ctx(t), mustSet(t, ms, -1), []float64{1, 2, math.NaN()},
		qha.Options{Grid: mesh.GridSpec{Mesh: [3]int{2, 2, 2}}, TempsK: []float64{-1}, PressureGPa: math.Inf(1), EOS: 7})
	ve, ok := err.(*physics.ValidationError)
	if !ok {
		t.Fatalf("err = %v, want a validation error", err)
	}
	want := map[string]bool{"models": true, "static_energies_ev": true, "static_energies_ev[2]": true, "temperatures_k[0]": true, "pressure_gpa": true, "eos": true}
	for _, v := range ve.Violations {
		delete(want, v.Field)
	}
	if len(want) > 0 {
		t.Errorf("missing violations %v in %v", want, err)
	}
}
