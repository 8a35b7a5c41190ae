package thermo

import (
	"context"
	"errors"
	"math"
	"slices"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
)

func mustThermal(t testing.TB, m *physics.Model, g *physics.GridModes, opt ThermalOptions) *ThermalResult {
	t.Helper()
	r, err := ComputeThermal(testmodels.Ctx(t), m, g, opt)
	if err != nil {
		t.Fatalf("ComputeThermal: %v", err)
	}
	return r
}

// einsteinCrystal is one site of mass 40 amu tied to its lattice point by
// an on-site block k·1 (k = 1 eV/Å², no springs, sum rule not enforced):
// every mode at every q is the Einstein oscillator ω² = k/m.
func einsteinCrystal() *physics.Crystal {
	return &physics.Crystal{
		Name: "einstein", Lattice: [][3]float64{{3, 0, 0}, {0, 3, 0}, {0, 0, 3}},
		Sites:  []physics.Site{{Label: "E", MassAmu: 40, Frac: []float64{0, 0, 0}}},
		Blocks: []physics.Block{{From: 0, To: 0, Cell: []int{0, 0, 0}, Phi: []float64{1, 0, 0, 0, 1, 0, 0, 0, 1}}},
	}
}

var einsteinNuTHz = math.Sqrt(1.0/40) * physics.NuUnitTHz

// TestEinsteinFunctions: the per-mode sums against the closed forms at
// x = hν/kT (values computed to 30 digits from the closed forms C/k =
// x²eˣ/(eˣ−1)², U_th/kT = x/(eˣ−1), S/k = x/(eˣ−1) − ln(1−e⁻ˣ); Kittel
// ch. 5), to 9 digits.
func TestEinsteinFunctions(t *testing.T) {
	for _, tc := range []struct{ x, c, u, s float64 }{
		{0.5, 0.979424522, 0.770747041, 1.703499171},
		{1, 0.920673594, 0.581976707, 1.040651852},
		{2, 0.724061661, 0.313035285, 0.458448743},
		{5, 0.170741822, 0.033918275, 0.040679024},
		{10, 0.004540405, 0.000454020, 0.000499421},
	} {
		out := make([]float64, 3)
		directSums(1, []float64{tc.x}, []float64{1}, 1, out) // κ = 1, ν = x
		if got := out[2]; math.Abs(got-tc.c) > 1e-9 {
			t.Errorf("x=%g: C/k = %.10f; want %.9f", tc.x, got, tc.c)
		}
		if got := out[0]; math.Abs(got-tc.u) > 1e-9 {
			t.Errorf("x=%g: U/kT = %.10f; want %.9f", tc.x, got, tc.u)
		}
		if got := out[0] - out[1]; math.Abs(got-tc.s) > 1e-9 {
			t.Errorf("x=%g: S/k = %.10f; want %.9f", tc.x, got, tc.s)
		}
	}
}

// TestEinsteinCrystal: a crystal of independent Einstein oscillators has,
// per cell, U = 3hν(½ + n), S and Cv three times the Einstein functions
// (Einstein 1907; Kittel ch. 5) and ZPE = 3hν/2, on any grid.
func TestEinsteinCrystal(t *testing.T) {
	m := testmodels.Compile(t, einsteinCrystal())
	g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{3, 3, 3}}, physics.GridOptions{})
	thetaE := einsteinNuTHz * physics.THzToKelvin
	xs := []float64{0.5, 1, 2, 5, 10}
	cs := []float64{0.979424522, 0.920673594, 0.724061661, 0.170741822, 0.004540405} // C/k = x²eˣ/(eˣ−1)² at each x, to 9 digits
	var temps []float64
	for _, x := range xs {
		temps = append(temps, thetaE/x)
	}
	r := mustThermal(t, m, g, ThermalOptions{TempsK: temps})
	if r.ZeroExcluded != 0 || math.Abs(r.ModesPerCell-3) > 1e-12 {
		t.Errorf("excluded %d zero modes, %v modes per cell; want 0 and 3", r.ZeroExcluded, r.ModesPerCell)
	}
	if want := 3 * einsteinNuTHz * physics.THzToEV / 2; testmodels.RelDiff(r.ZPEeV, want) > 1e-12 {
		t.Errorf("ZPE %.12g eV; want 3hν/2 = %.12g", r.ZPEeV, want)
	}
	for i, p := range r.Points {
		if got := p.CveVPerK / physics.BoltzmannEVPerK / 3; math.Abs(got-cs[i]) > 1e-9 {
			t.Errorf("x=%g: Cv/3k = %.10f; want %.9f", xs[i], got, cs[i])
		}
		x := xs[i]
		wantU := 3 * einsteinNuTHz * physics.THzToEV * (0.5 + 1/math.Expm1(x))
		if testmodels.RelDiff(p.UeV, wantU) > 1e-12 {
			t.Errorf("x=%g: U = %.12g eV; want %.12g", x, p.UeV, wantU)
		}
	}
}

// TestDulongPetit: at high T the heat capacity tends to k per mode, 3R per
// site per mole for p = 3 (Dulong–Petit; R = 24.94338785/3 J/(mol·K),
// CODATA 2018), approached as C/(Nk) = 1 − ⟨x²⟩/12 + ⟨x⁴⟩/240 (the
// high-temperature expansion of x²eˣ/(eˣ−1)² averaged over the modes;
// common practice). For the fcc example the zone
// average ⟨ω²⟩ = 4K/M exactly on any Γ-centred grid of N ≥ 2 per direction
// (derived from the trace of the nearest-neighbour dynamical matrix;
// Ashcroft & Mermin ch. 22), which fixes the first correction
// independently of the modes.
func TestDulongPetit(t *testing.T) {
	for _, name := range []string{"fcc", "rocksalt-like"} {
		m, g := testmodels.Grid(t, name, mesh.GridSpec{Mesh: [3]int{6, 6, 6}}, physics.GridOptions{})
		r := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{1e6}})
		// Per mole of cells, less the weight of the three Γ zero modes.
		perSite := physics.EVPerKToJPerMolK(r.Points[0].CveVPerK) / float64(m.Sites()) * float64(m.ModeCount()) / r.ModesPerCell
		if math.Abs(perSite-24.94338785) > 1e-6*24.94338785 {
			t.Errorf("%s: Cv at 10⁶ K = %.8f J/(mol·K) per site; want 3R = 24.94338785", name, perSite)
		}
	}
	m, g := testmodels.Grid(t, "fcc", mesh.GridSpec{Mesh: [3]int{8, 8, 8}}, physics.GridOptions{})
	const k, mass = 1.2, 60.0 // proto/examples/fcc.json
	r := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{1e4}})
	// ⟨x²⟩ over the summed modes: Σ w ν² = 3·4K/M·ν_unit², spread over
	// ModesPerCell (the three Γ zero modes carry no ν²).
	nu2 := 3 * 4 * k / mass * physics.NuUnitTHz * physics.NuUnitTHz / r.ModesPerCell
	x2 := nu2 * math.Pow(physics.THzToKelvin/1e4, 2)
	deficit := 1 - r.Points[0].CveVPerK/physics.BoltzmannEVPerK/r.ModesPerCell
	if testmodels.RelDiff(deficit, x2/12) > 1e-3 { // the ⟨x⁴⟩/240 term is ~1e-4 of ⟨x²⟩/12 here
		t.Errorf("1 − C/Nk at 10⁴ K = %.6g; want ⟨x²⟩/12 = %.6g", deficit, x2/12)
	}
}

// TestLowTExponents: Cv ∝ T^d at low T (Debye; Kittel ch. 5, Ashcroft &
// Mermin ch. 23), the exponent fitted from two temperatures a factor 2
// apart. 1D and 2D use the exact mode sum on grids fine enough that the
// lowest grid frequency lies well below kT/h; in 3D no affordable grid is,
// so the DOS-integral route is used, whose tetrahedron DOS below the first
// grid shell is ∝ ν² (the cubic state count of tetrahedra touching Γ, as
// for linear acoustic dispersion). Tolerances: 1 %, 2.5 %, 1 %.
func TestLowTExponents(t *testing.T) {
	for _, tc := range []struct {
		name  string
		mesh  [3]int
		route ThermalRoute
		t1    float64
		want  float64
		tol   float64
	}{
		{"chain", [3]int{100000}, ModeSum, 1, 1, 0.01},
		{"square-net", [3]int{256, 256}, ModeSum, 4, 2, 0.05},
		{"fcc", [3]int{24, 24, 24}, DOSIntegral, 1, 3, 0.03},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m, g := testmodels.Grid(t, tc.name, mesh.GridSpec{Mesh: tc.mesh}, physics.GridOptions{})
			r := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{tc.t1, 2 * tc.t1}, Route: tc.route})
			exp := math.Log2(r.Points[1].CveVPerK / r.Points[0].CveVPerK)
			if math.Abs(exp-tc.want) > tc.tol {
				t.Errorf("Cv exponent %.4f between %g and %g K; want %g ± %g", exp, tc.t1, 2*tc.t1, tc.want, tc.tol)
			}
			// Below the dispersive region θ_D(T) tends to the elastic θ_D
			// (Kittel ch. 5), to 1 % where the mode sum resolves it.
			if tc.route == ModeSum {
				if got, want := r.Points[0].ThetaDK, r.ThetaElasticK; testmodels.RelDiff(got, want) > 0.01 {
					t.Errorf("θ_D(%g K) = %.2f K; elastic θ_D %.2f K", tc.t1, got, want)
				}
			}
		})
	}
}

// TestThermodynamicConsistency: F = U − TS, S = −∂F/∂T and Cv = ∂U/∂T
// (central differences at steps h = 1e-3 T and h/2, Richardson-extrapolated:
// error ~ (h/T)⁴x⁴ ≤ 1e-6 for x = hν/kT ≤ 30, plus the rounding of U
// and F over the step), S ≥ 0 and Cv ≥ 0 (Callen,
// Thermodynamics, ch. 5 and 8; common practice).
func TestThermodynamicConsistency(t *testing.T) {
	for _, tc := range []struct {
		name string
		mesh [3]int
	}{
		{"diatomic-chain", [3]int{64}},
		{"square-net", [3]int{16, 16}},
		{"fcc", [3]int{8, 8, 8}},
		{"rocksalt-like", [3]int{6, 6, 6}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m, g := testmodels.Grid(t, tc.name, mesh.GridSpec{Mesh: tc.mesh}, physics.GridOptions{})
			for _, temp := range []float64{5, 50, 300, 2000} {
				h := 1e-3 * temp
				r := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{temp - h, temp - h/2, temp, temp + h/2, temp + h}})
				pt := r.Points
				p := pt[2]
				deriv := func(f func(ThermalPoint) float64) float64 {
					d1 := (f(pt[4]) - f(pt[0])) / (2 * h)
					d2 := (f(pt[3]) - f(pt[1])) / h
					return (4*d2 - d1) / 3
				}
				if d := math.Abs(p.FeV - (p.UeV - temp*p.SeVPerK)); d > 1e-12*math.Abs(p.UeV) {
					t.Errorf("T=%g: F − (U − TS) = %.3g eV", temp, d)
				}
				// Rounding of U and F (which hold the zero-point energy) limits
				// the differences at low T: add 4ε|U|/h to the tolerance.
				round := 4 * 2.2e-16 * math.Abs(p.UeV) / h
				if s := -deriv(func(p ThermalPoint) float64 { return p.FeV }); math.Abs(s-p.SeVPerK) > 1e-6*p.SeVPerK+round {
					t.Errorf("T=%g: −∂F/∂T = %.9g; S = %.9g eV/K", temp, s, p.SeVPerK)
				}
				if c := deriv(func(p ThermalPoint) float64 { return p.UeV }); math.Abs(c-p.CveVPerK) > 1e-6*p.CveVPerK+round {
					t.Errorf("T=%g: ∂U/∂T = %.9g; Cv = %.9g eV/K", temp, c, p.CveVPerK)
				}
				if p.SeVPerK < 0 || p.CveVPerK < 0 {
					t.Errorf("T=%g: S = %g, Cv = %g; want ≥ 0", temp, p.SeVPerK, p.CveVPerK)
				}
			}
		})
	}
}

// TestModeSumVsDOSIntegral: the exact mode sum and the integral over the
// tetrahedron DOS of the same 24³ grid agree (they sample the same
// spectrum; common practice) to 2e-3 for T ≥ 100 K (measured ≤ 7.3e-4, the
// entropy at 100 K; the zero-point energy to 1e-8).
func TestModeSumVsDOSIntegral(t *testing.T) {
	m, g := testmodels.Grid(t, "fcc", mesh.GridSpec{Mesh: [3]int{24, 24, 24}}, physics.GridOptions{})
	temps := []float64{100, 300, 1000}
	a := mustThermal(t, m, g, ThermalOptions{TempsK: temps})
	b := mustThermal(t, m, g, ThermalOptions{TempsK: temps, Route: DOSIntegral})
	if testmodels.RelDiff(a.ZPEeV, b.ZPEeV) > 1e-6 {
		t.Errorf("ZPE: mode sum %.8g, DOS %.8g eV", a.ZPEeV, b.ZPEeV)
	}
	for i, temp := range temps {
		p, q := a.Points[i], b.Points[i]
		for _, c := range []struct {
			name string
			x, y float64
		}{{"U", p.UeV, q.UeV}, {"F", p.FeV, q.FeV}, {"S", p.SeVPerK, q.SeVPerK}, {"Cv", p.CveVPerK, q.CveVPerK}} {
			if testmodels.RelDiff(c.x, c.y) > 2e-3 {
				t.Errorf("T=%g %s: mode sum %.8g, DOS integral %.8g", temp, c.name, c.x, c.y)
			}
		}
	}
}

// TestThermalWeights: the q-point weights of a grid sum to 1 (common
// practice); a Γ-centred grid leaves out exactly the p zero modes at Γ,
// weight p/N, and a shifted grid (no Γ) none.
func TestThermalWeights(t *testing.T) {
	for _, tc := range []struct {
		name  string
		spec  mesh.GridSpec
		zeros int
	}{
		{"rocksalt-like", mesh.GridSpec{Mesh: [3]int{5, 5, 5}}, 3},
		{"rocksalt-like", mesh.GridSpec{Mesh: [3]int{4, 4, 4}, Shifted: true}, 0},
		{"square-net", mesh.GridSpec{Mesh: [3]int{7, 7}, Finite: true}, 2},
		{"diatomic-chain", mesh.GridSpec{Mesh: [3]int{9}}, 1},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m, g := testmodels.Grid(t, tc.name, tc.spec, physics.GridOptions{})
			sum := 0.0
			for _, p := range g.Points {
				sum += p.Weight
			}
			if math.Abs(sum-1) > 1e-12 {
				t.Errorf("Σ weights = %.15f; want 1", sum)
			}
			r := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{300}})
			n := float64(g.Spec.Count())
			if r.ZeroExcluded != tc.zeros {
				t.Errorf("excluded %d zero modes; want %d", r.ZeroExcluded, tc.zeros)
			}
			if want := float64(m.ModeCount()) - float64(tc.zeros)/n; math.Abs(r.ModesPerCell-want) > 1e-12 {
				t.Errorf("modes per cell %.15g; want %.15g", r.ModesPerCell, want)
			}
		})
	}
}

// TestZeroKelvin: at T = 0, U = F = the zero-point energy, S = Cv = 0 and
// θ_D is reported as its T → 0 limit, the elastic θ_D (Kittel ch. 5; it
// used to be a bare 0, which read as a Debye temperature of 0 K); just
// above, the values join continuously (common practice: the limits of the
// Bose–Einstein sums).
func TestZeroKelvin(t *testing.T) {
	m, g := testmodels.Grid(t, "rocksalt-like", mesh.GridSpec{Mesh: [3]int{6, 6, 6}}, physics.GridOptions{Eigenvectors: true})
	r := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{0, 0.01}, MSD: true})
	z, near := r.Points[0], r.Points[1]
	if z.UeV != r.ZPEeV || z.FeV != r.ZPEeV || z.SeVPerK != 0 || z.CveVPerK != 0 {
		t.Errorf("T=0: %+v; want U = F = ZPE %g, S = Cv = 0", z, r.ZPEeV)
	}
	if z.ThetaDStatus != ThetaElasticLimit || z.ThetaDK != r.ThetaElasticK || !(z.ThetaDK > 0) {
		t.Errorf("T=0: θ_D %g K (%v); want the elastic limit %g K", z.ThetaDK, z.ThetaDStatus, r.ThetaElasticK)
	}
	if testmodels.RelDiff(near.UeV, z.UeV) > 1e-12 || testmodels.RelDiff(near.FeV, z.FeV) > 1e-12 || near.SeVPerK > 1e-20 {
		t.Errorf("T=0.01 K: U %g, F %g, S %g; not at the T=0 limit", near.UeV, near.FeV, near.SeVPerK)
	}
	for s := range z.MSD {
		if testmodels.RelDiff(near.MSD[s].UIso, z.MSD[s].UIso) > 1e-12 || !(z.MSD[s].UIso > 0) {
			t.Errorf("site %d: zero-point ⟨u²⟩/3 = %g, at 0.01 K %g", s, z.MSD[s].UIso, near.MSD[s].UIso)
		}
	}
}

// TestUnstable: imaginary modes make ComputeThermal fail with ErrUnstable
// unless allowed; allowed, they are left out and counted.
func TestUnstable(t *testing.T) {
	m := testmodels.Compile(t, testmodels.UnstableChain())
	g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{100}}, physics.GridOptions{})
	_, err := ComputeThermal(testmodels.Ctx(t), m, g, ThermalOptions{TempsK: []float64{300}})
	if !errors.Is(err, ErrUnstable) {
		t.Fatalf("got %v; want an error wrapping ErrUnstable", err)
	}
	imag := spectra.Stats(g).Imaginary
	r := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{300}, AllowUnstable: true})
	if r.ImaginaryExcluded != imag || imag == 0 {
		t.Errorf("ImaginaryExcluded = %d; want %d (> 0)", r.ImaginaryExcluded, imag)
	}
	if p := r.Points[0]; !finite(p.UeV) || !finite(p.SeVPerK) || p.CveVPerK <= 0 {
		t.Errorf("allowed unstable model: %+v", p)
	}
}

// TestFiniteCrystal: a ring of 10 cells is summed exactly over its ten
// allowed modes ν_n = ν_max |sin(πn/10)|, n = −4…5, less the zero mode
// (allowed wavevectors: common practice; dispersion: Kittel ch. 4), and at
// low T it falls far below the bulk, which has modes down to ν → 0.
func TestFiniteCrystal(t *testing.T) {
	m, g := testmodels.Grid(t, "chain", mesh.GridSpec{Mesh: [3]int{10}, Finite: true}, physics.GridOptions{})
	temps := []float64{5, 30, 300}
	r := mustThermal(t, m, g, ThermalOptions{TempsK: temps})
	for i, temp := range temps {
		cv, u := 0.0, 0.0
		for n := -4; n <= 5; n++ {
			if n == 0 {
				continue
			}
			nu := testmodels.ChainNuMaxTHz * math.Abs(math.Sin(math.Pi*float64(n)/10))
			x := nu * physics.THzToKelvin / temp
			cv += x * x * math.Exp(x) / (math.Expm1(x) * math.Expm1(x)) / 10
			u += nu * physics.THzToEV * (0.5 + 1/math.Expm1(x)) / 10
		}
		if got := r.Points[i].CveVPerK / physics.BoltzmannEVPerK; testmodels.RelDiff(got, cv) > 1e-12 {
			t.Errorf("T=%g: Cv/k = %.15g; exact sum %.15g", temp, got, cv)
		}
		if testmodels.RelDiff(r.Points[i].UeV, u) > 1e-12 {
			t.Errorf("T=%g: U = %.15g; exact sum %.15g", temp, r.Points[i].UeV, u)
		}
	}
	_, bulkG := testmodels.Grid(t, "chain", mesh.GridSpec{Mesh: [3]int{10000}}, physics.GridOptions{})
	bulk := mustThermal(t, m, bulkG, ThermalOptions{TempsK: temps[:1]})
	if !(r.Points[0].CveVPerK < 0.5*bulk.Points[0].CveVPerK) {
		t.Errorf("Cv at 5 K: 10-cell ring %g, bulk %g; want the ring far below", r.Points[0].CveVPerK, bulk.Points[0].CveVPerK)
	}
}

// TestSeriesMatchesDirect: the frequency tree with Taylor series gives the
// exact mode sums to 1e-11 relative from 0.01 K to 10⁵ K (its truncation
// bound is ~1e-15, see thermal_series.go), with mean-square displacements.
func TestSeriesMatchesDirect(t *testing.T) {
	for _, tc := range []struct {
		name string
		mesh [3]int
	}{
		{"rocksalt-like", [3]int{12, 12, 12}},
		{"chain", [3]int{20000}},
		{"square-net", [3]int{64, 64}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m, g := testmodels.Grid(t, tc.name, mesh.GridSpec{Mesh: tc.mesh}, physics.GridOptions{Eigenvectors: true})
			var temps []float64
			for e := -2.0; e <= 5; e += 0.1 {
				temps = append(temps, math.Pow(10, e))
			}
			opt := ThermalOptions{TempsK: temps, MSD: true}
			d, err := computeThermal(testmodels.Ctx(t), m, g, opt, evalDirect)
			if err != nil {
				t.Fatal(err)
			}
			s, err := computeThermal(testmodels.Ctx(t), m, g, opt, evalTree)
			if err != nil {
				t.Fatal(err)
			}
			for i, temp := range temps {
				p, q := d.Points[i], s.Points[i]
				for _, c := range []struct {
					name string
					x, y float64
				}{
					{"U − ZPE", p.UeV - d.ZPEeV, q.UeV - s.ZPEeV},
					{"F − ZPE", p.FeV - d.ZPEeV, q.FeV - s.ZPEeV},
					{"S", p.SeVPerK, q.SeVPerK},
					{"Cv", p.CveVPerK, q.CveVPerK},
					{"MSD", p.MSD[0].U[0], q.MSD[0].U[0]},
				} {
					if testmodels.RelDiff(c.x, c.y) > 1e-11 {
						t.Errorf("T=%.4g K %s: direct %.15g, series %.15g", temp, c.name, c.x, c.y)
					}
				}
			}
		})
	}
}

// TestPerMole: 1 eV per cell is e·N_A = 96.48533212 kJ per mole of cells
// (the Faraday constant, CODATA 2018: e and N_A exact).
func TestPerMole(t *testing.T) {
	if got := physics.EVToKJPerMol(1); math.Abs(got-96.48533212) > 1e-8 {
		t.Errorf("EVToKJPerMol(1) = %.10f; want 96.48533212", got)
	}
	if got := physics.EVPerKToJPerMolK(physics.BoltzmannEVPerK); math.Abs(got-8.314462618) > 1e-9 {
		t.Errorf("k_B per mole = %.10f J/(mol·K); want R = 8.314462618", got)
	}
}

// TestThermalValidation: bad options are refused with every violation
// named by its field; MSD needs eigenvectors.
func TestThermalValidation(t *testing.T) {
	m, g := testmodels.Grid(t, "chain", mesh.GridSpec{Mesh: [3]int{16}}, physics.GridOptions{})
	for _, tc := range []struct {
		name   string
		opt    ThermalOptions
		fields []string
	}{
		{"no temperatures", ThermalOptions{}, []string{"temperatures_k"}},
		{"bad temperatures", ThermalOptions{TempsK: []float64{300, -1, math.NaN(), 2e6}},
			[]string{"temperatures_k[1]", "temperatures_k[2]", "temperatures_k[3]"}},
		{"route", ThermalOptions{TempsK: []float64{1}, Route: 9}, []string{"route"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ComputeThermal(testmodels.Ctx(t), m, g, tc.opt)
			var ve *physics.ValidationError
			if !errors.As(err, &ve) {
				t.Fatalf("got %v; want a *ValidationError", err)
			}
			var got []string
			for _, v := range ve.Violations {
				got = append(got, v.Field)
			}
			if !slices.Equal(got, tc.fields) {
				t.Errorf("fields %v; want %v", got, tc.fields)
			}
		})
	}
	if _, err := ComputeThermal(testmodels.Ctx(t), m, g, ThermalOptions{TempsK: []float64{1}, MSD: true}); err == nil {
		t.Error("MSD without eigenvectors: no error")
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := ComputeThermal(ctx, m, g, ThermalOptions{TempsK: []float64{300}}); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled context: got %v; want context.Canceled", err)
	}
}

// TestGammaAcousticNotImaginary: a block model whose on-site term misses
// the acoustic sum rule by 1e-5 has a slightly negative acoustic mode at Γ
// and nowhere else on a 100-point ring. Like Model.Stability, the DOS and
// the thermal sums do not count it imaginary: it is left out as a zero
// mode, and the model is not unstable (ω²(q) = (2(1−1e-5) − 2 cos q)/M for
// neighbour blocks −1 eV/Å²: Born–von Kármán chain, Kittel ch. 4).
func TestGammaAcousticNotImaginary(t *testing.T) {
	c := &physics.Crystal{
		Name: "near-sum-rule", Lattice: [][3]float64{{2.5, 0, 0}}, Polarizations: 1,
		Sites: []physics.Site{{Label: "A", MassAmu: 40, Frac: []float64{0}}},
		Blocks: []physics.Block{
			{From: 0, To: 0, Cell: []int{1}, Phi: []float64{-1, 0, 0, 0, -1, 0, 0, 0, -1}},
			{From: 0, To: 0, Cell: []int{0}, Phi: []float64{2 * (1 - 1e-5), 0, 0, 0, 2, 0, 0, 0, 2}},
		},
	}
	m := testmodels.Compile(t, c)
	g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{100}}, physics.GridOptions{})
	if g.FreqTHz[0] >= -m.EigenTolTHz() {
		t.Fatalf("Γ mode %g THz is not below −EigenTolTHz; the test needs it to be", g.FreqTHz[0])
	}
	if _, _, stable, err := m.Stability(testmodels.Ctx(t), 100); err != nil || !stable {
		t.Fatalf("Stability: stable = %v, err = %v; the reference classification must be stable", stable, err)
	}
	if d := mustDOS(t, m, g, spectra.DOSOptions{}); d.Imaginary != 0 {
		t.Errorf("DOS counts %d imaginary modes; want 0", d.Imaginary)
	}
	r := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{300}})
	if r.ImaginaryExcluded != 0 || r.ZeroExcluded != 1 {
		t.Errorf("excluded %d imaginary, %d zero modes; want 0 and 1", r.ImaginaryExcluded, r.ZeroExcluded)
	}
}

// TestThermalTinyTemperature: temperatures so small that k_B·T underflows
// against hν give the T = 0 limits (S = 0, Cv = 0, U = F = zero-point
// energy; the third law, Kittel ch. 5), not NaN — found by fuzzing.
func TestThermalTinyTemperature(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "chain"))
	g, err := m.GridModes(context.Background(), mesh.GridSpec{Mesh: [3]int{8}}, physics.GridOptions{})
	if err != nil {
		t.Fatal(err)
	}
	r, err := ComputeThermal(context.Background(), m, g, ThermalOptions{TempsK: []float64{0, 9.005004792076203e-308, 5e-324}})
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range r.Points {
		if p.SeVPerK != 0 || p.CveVPerK != 0 || p.UeV != r.ZPEeV || p.FeV != r.ZPEeV {
			t.Errorf("T = %g K: S %v, Cv %v, U %v, F %v; want 0, 0, ZPE %v, ZPE", p.TempK, p.SeVPerK, p.CveVPerK, p.UeV, p.FeV, r.ZPEeV)
		}
	}
}
