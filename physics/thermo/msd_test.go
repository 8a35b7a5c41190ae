package thermo

import (
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// TestMSDEinstein: an Einstein oscillator of mass m and frequency ω has
// ⟨u_α²⟩ = ħ/(2mω) coth(ħω/2kT) along each axis and no correlation between
// axes (Willis & Pryor, Thermal Vibrations in Crystallography, ch. 4; any
// harmonic-oscillator text), B = 8π²⟨u²⟩/3; CODATA 2018 constants.
func TestMSDEinstein(t *testing.T) {
	m := testmodels.Compile(t, einsteinCrystal())
	g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{2, 2, 2}}, physics.GridOptions{Eigenvectors: true})
	temps := []float64{0, 10, 300, 3000}
	r := mustThermal(t, m, g, ThermalOptions{TempsK: temps, MSD: true})
	omega := 2 * math.Pi * einsteinNuTHz * 1e12
	zp := physics.ReducedPlanckJS / (2 * 40 * physics.AtomicMassKg * omega) * 1e20 // Å²
	for i, temp := range temps {
		want := zp
		if temp > 0 {
			want = zp / math.Tanh(physics.ReducedPlanckJS*omega/(2*physics.BoltzmannJPerK*temp))
		}
		u := r.Points[i].MSD[0]
		for a := 0; a < 3; a++ {
			for b := 0; b < 3; b++ {
				w := 0.0
				if a == b {
					w = want
				}
				if math.Abs(u.U[3*a+b]-w) > 1e-12*want {
					t.Errorf("T=%g: U[%d][%d] = %.12g Å²; want %.12g", temp, a, b, u.U[3*a+b], w)
				}
			}
		}
		if testmodels.RelDiff(u.UIso, want) > 1e-12 || testmodels.RelDiff(u.B, 8*math.Pi*math.Pi*want) > 1e-12 {
			t.Errorf("T=%g: UIso %.12g, B %.12g; want %.12g, %.12g", temp, u.UIso, u.B, want, 8*math.Pi*math.Pi*want)
		}
	}
}

// TestMSDCubicIsotropy: a site of cubic symmetry has an isotropic
// displacement tensor, ⟨u uᵀ⟩ = U_iso·1 (a symmetric second-rank tensor
// invariant under the cubic point group; Nye, Physical Properties of
// Crystals, ch. 1; Willis & Pryor ch. 4), on a Γ-centred grid, which keeps
// the full symmetry.
func TestMSDCubicIsotropy(t *testing.T) {
	for _, name := range []string{"fcc", "rocksalt-like"} {
		t.Run(name, func(t *testing.T) {
			m, g := testmodels.Grid(t, name, mesh.GridSpec{Mesh: [3]int{6, 6, 6}}, physics.GridOptions{Eigenvectors: true})
			r := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{0, 300}, MSD: true})
			for _, p := range r.Points {
				for s, u := range p.MSD {
					for a := 0; a < 3; a++ {
						for b := 0; b < 3; b++ {
							w := 0.0
							if a == b {
								w = u.UIso
							}
							if math.Abs(u.U[3*a+b]-w) > 1e-10*u.UIso {
								t.Errorf("T=%g site %d: U[%d][%d] = %.12g; want %.12g", p.TempK, s, a, b, u.U[3*a+b], w)
							}
						}
					}
				}
			}
		})
	}
}

// TestMSDMassWeightedSum: Σ_s m_s tr⟨u_s u_sᵀ⟩ = Σ_modes w ħ/(2ω) coth(ħω/2kT),
// because Σ_s |e_s|² = 1 for every normalised eigenvector (common
// practice): a check of the eigenvector weighting against frequencies
// alone. And the light site moves more than the heavy one.
func TestMSDMassWeightedSum(t *testing.T) {
	m, g := testmodels.Grid(t, "rocksalt-like", mesh.GridSpec{Mesh: [3]int{6, 6, 6}}, physics.GridOptions{Eigenvectors: true})
	temps := []float64{0, 300}
	r := mustThermal(t, m, g, ThermalOptions{TempsK: temps, MSD: true})
	st := spectra.Stats(g)
	for i, temp := range temps {
		want := 0.0
		for j, f := range g.FreqTHz {
			if f <= spectra.ZeroModeTol*st.AbsMaxTHz {
				continue
			}
			w := g.Points[j/g.NModes].Weight
			c := 1.0
			if temp > 0 {
				c = 1 / math.Tanh(f*physics.THzToKelvin/(2*temp))
			}
			want += w * msdUnitA2 / f * c
		}
		got := 0.0
		for s, u := range r.Points[i].MSD {
			got += m.MassAmu(s) * (u.U[0] + u.U[4] + u.U[8])
		}
		if testmodels.RelDiff(got, want) > 1e-12 {
			t.Errorf("T=%g: Σ m tr U = %.14g amu·Å²; want %.14g", temp, got, want)
		}
		if light, heavy := r.Points[i].MSD[0].UIso, r.Points[i].MSD[1].UIso; !(light > heavy) {
			t.Errorf("T=%g: ⟨u²⟩ of the 25 amu site %g not above the 80 amu site's %g", temp, light, heavy)
		}
	}
}

// TestMSDClassicalLimit: at high T, ⟨u²⟩ grows linearly with T
// (equipartition; Willis & Pryor ch. 4): ⟨u²⟩ ∝ T(1 + x²/12 + …), x ≤ 0.015
// at 2·10⁴ K here, so doubling T doubles it to 1e-4.
func TestMSDClassicalLimit(t *testing.T) {
	m, g := testmodels.Grid(t, "fcc", mesh.GridSpec{Mesh: [3]int{6, 6, 6}}, physics.GridOptions{Eigenvectors: true})
	r := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{2e4, 4e4}, MSD: true})
	if ratio := r.Points[1].MSD[0].UIso / r.Points[0].MSD[0].UIso; math.Abs(ratio-2) > 1e-4 {
		t.Errorf("⟨u²⟩(4·10⁴ K)/⟨u²⟩(2·10⁴ K) = %.6f; want 2", ratio)
	}
}

// TestMSDChainDiverges: in one dimension the thermal ⟨u²⟩ of an infinite
// crystal diverges (Peierls, Helv. Phys. Acta 7, 81 (1934); Mermin, Phys.
// Rev. 176, 250 (1968)): the classical grid sum kT/M Σ_q w/ω² grows as N,
// so doubling the ring doubles it at high T (to 2 %).
func TestMSDChainDiverges(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "chain"))
	var u []float64
	for _, n := range []int{200, 400} {
		g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{n}, Finite: true}, physics.GridOptions{Eigenvectors: true})
		r := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{2000}, MSD: true})
		u = append(u, r.Points[0].MSD[0].U[0])
	}
	if ratio := u[1] / u[0]; math.Abs(ratio-2) > 0.04 {
		t.Errorf("⟨u²⟩ of a 400-cell ring / 200-cell ring = %.4f; want ≈ 2", ratio)
	}
}

// TestMSDRoutes: displacements are mode sums on either thermal route
// (the DOS carries no eigenvectors), so both routes give the same tensor.
func TestMSDRoutes(t *testing.T) {
	m, g := testmodels.Grid(t, "rocksalt-like", mesh.GridSpec{Mesh: [3]int{4, 4, 4}}, physics.GridOptions{Eigenvectors: true})
	a := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{300}, MSD: true})
	b := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{300}, MSD: true, Route: DOSIntegral})
	for s := range a.Points[0].MSD {
		if a.Points[0].MSD[s] != b.Points[0].MSD[s] {
			t.Errorf("site %d: mode sum %+v, DOS route %+v", s, a.Points[0].MSD[s], b.Points[0].MSD[s])
		}
	}
}
