package thermo

import (
	"math"
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// einsteinHeat is the Einstein heat capacity per mode, in units of k_B, at
// x = hν/kT: x²eˣ/(eˣ − 1)² = (x/2)²/sinh²(x/2) (Kittel ch. 5), and its
// logarithmic derivative magnitude |x c′(x)|.
func einsteinHeat(x float64) (c, slope float64) {
	f := func(x float64) float64 {
		if x == 0 {
			return 1
		}
		s := math.Sinh(x / 2)
		return x * x / 4 / (s * s)
	}
	const h = 1e-4
	return f(x), math.Abs(f(x*(1+h))-f(x*(1-h))) / (2 * h)
}

// TestStiffnessContrastChain: a two-site chain whose springs differ by a
// factor 1e12 has its whole acoustic branch below 1e-6 of the optical
// one. Every acoustic mode but Γ's is a real mode: the heat capacity is
// the exact mode sum over the same 16 q-points, here from the closed form
// of the chain with masses M₁, M₂ and alternating springs K₁, K₂ (Kittel,
// Introduction to Solid State Physics, ch. 4, diatomic chain, and its
// problem of alternating force constants):
//
//	ω²± = (K₁+K₂)(1/M₁+1/M₂)/2 ± sqrt([(K₁+K₂)(1/M₁+1/M₂)/2]² − 4K₁K₂ sin²(qa/2)/(M₁M₂)),
//
// the acoustic root taken as the product 4K₁K₂ sin²(qa/2)/(M₁M₂) over ω²₊
// (no cancellation). At 1 K the acoustic modes are classical (x ≤ 2e-4)
// and the optical ones frozen, so Cv = (15/16) R; the old relative cut kept
// one acoustic mode in 16 (0.52 J/(mol·K) instead of 7.79). At 1e-4 K the
// acoustic modes are quantum (x up to 1.8).
//
// Tolerance: the Hermitian solver returns each ω² with an absolute error of
// a few ε‖D‖ (backward stability; Golub & Van Loan, Matrix Computations,
// §8.1), 16ε·ω²₊,max allowed here, which is up to 1e-3 of the smallest
// acoustic ω² on this grid; a relative error δ in ω² moves a mode's Cv by
// k·|x c′(x)|·δ/2. The tolerance is that sum over the modes plus 1e-12
// relative for the summation.
func TestStiffnessContrastChain(t *testing.T) {
	const (
		m1, m2 = 20.0, 50.0
		k1, k2 = 1.0, 1e-12 // eV/Å²
		n      = 16
	)
	c := testmodels.Load(t, "diatomic-chain")
	c.Springs[0].KLong, c.Springs[1].KLong = k1, k2
	m := testmodels.Compile(t, c)
	g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{n}}, physics.GridOptions{})
	temps := []float64{1e-4, 1, 300}
	r := mustThermal(t, m, g, ThermalOptions{TempsK: temps})

	half := (k1 + k2) * (1/m1 + 1/m2) / 2
	lamMax := 2 * half
	for i, tK := range temps {
		want, tol := 0.0, 0.0
		for j := 1; j < n; j++ { // j = 0 is Γ: its acoustic mode is a translation
			s := math.Sin(math.Pi * float64(j) / n)
			det := 4 * k1 * k2 * s * s / (m1 * m2)
			plus := half + math.Sqrt(half*half-det)
			for _, lam := range []float64{det / plus, plus} {
				x := math.Sqrt(lam) * physics.NuUnitTHz * physics.THzToKelvin / tK
				cv, slope := einsteinHeat(x)
				want += cv / n
				tol += slope * (16 * 2.2e-16 * lamMax / lam) / 2 / n
			}
		}
		x := math.Sqrt(lamMax) * physics.NuUnitTHz * physics.THzToKelvin / tK // Γ optical
		cv, slope := einsteinHeat(x)
		want += cv / n
		tol += slope*(16*2.2e-16)/2/n + 1e-12*want
		got := r.Points[i].CveVPerK / physics.BoltzmannEVPerK
		if math.Abs(got-want) > tol {
			t.Errorf("T = %g K: Cv = %.12g k_B per cell; closed-form mode sum %.12g ± %.2g", tK, got, want, tol)
		}
		t.Logf("T = %g K: Cv = %.4f J/(mol·K), closed form %.4f", tK, physics.EVPerKToJPerMolK(r.Points[i].CveVPerK), want*physics.GasConstantJPerMolK)
	}
	if r.ZeroExcluded != 1 || r.ModesPerCell != 2-1.0/n {
		t.Errorf("left out %d modes, summed %g per cell; want Γ's acoustic mode only (1, %g)", r.ZeroExcluded, r.ModesPerCell, 2-1.0/n)
	}
	// The DOS holds the same modes: its states are the summed modes plus
	// Γ's acoustic mode.
	d := mustDOS(t, m, g, spectra.DOSOptions{Method: spectra.Histogram})
	if states := d.Integrated[len(d.Integrated)-1]; math.Abs(states-(r.ModesPerCell+1.0/n)) > 1e-12 {
		t.Errorf("DOS holds %.15g states per cell, the thermal sums %.15g + Γ's 1/%d", states, r.ModesPerCell, n)
	}
}

// TestChainLowTLargeGrid: on a 2²² = 4 194 304-point ring at 0.01 K, the
// lowest modes (ν_max sin(π/N) ≈ 7.5e-7 ν_max, below the old relative cut of
// 1e-6 ν_max) carry the heat capacity as much as any other. Cv is checked
// against the closed-form sum over the same q-points, ν_j = ν_max |sin(πj/N)|,
// ν_max = 2 sqrt(K/M)/2π (Kittel ch. 4, monatomic chain), j ≠ 0. The
// GridModes are built from the closed form (the engine's chain frequencies
// are checked against it elsewhere, and 4M diagonalisations would take
// seconds); four temperatures make the sums take the series route too.
// Tolerance 1e-9: rounding over 4M terms.
func TestChainLowTLargeGrid(t *testing.T) {
	const n = 1 << 22
	m := testmodels.Compile(t, testmodels.Load(t, "chain")) // K = 1.5 eV/Å², M = 40 amu
	numax := 2 * math.Sqrt(1.5/40) * physics.NuUnitTHz
	if f := m.FrequenciesTHz([3]float64{0.5}); testmodels.RelDiff(f[0], numax) > 1e-12 {
		t.Fatalf("zone-boundary frequency %g THz; closed form %g", f[0], numax)
	}
	g := &physics.GridModes{Spec: mesh.GridSpec{Mesh: [3]int{n, 1, 1}}, NModes: 1, NSites: 1, P: 1, ModelHash: m.Hash(),
		Points: make([]mesh.QPoint, n), FreqTHz: make([]float64, n)}
	for j := range g.Points {
		g.Points[j] = mesh.QPoint{Q: [3]float64{float64(j) / n}, Weight: 1.0 / n}
		g.FreqTHz[j] = numax * math.Abs(math.Sin(math.Pi*float64(j)/n))
	}
	temps := []float64{0.01, 0.02, 0.05, 0.1}
	r := mustThermal(t, m, g, ThermalOptions{TempsK: temps})
	for i, tK := range temps {
		want := 0.0
		for j := 1; j <= n/2; j++ { // ν_j = ν_(N−j); terms past x = 60 are below 1e-20 of the sum
			x := g.FreqTHz[j] * physics.THzToKelvin / tK
			if x > 60 {
				break
			}
			c, _ := einsteinHeat(x)
			if j < n/2 {
				c *= 2
			}
			want += c / n
		}
		if got := r.Points[i].CveVPerK / physics.BoltzmannEVPerK; testmodels.RelDiff(got, want) > 1e-9 {
			t.Errorf("T = %g K: Cv = %.12g k_B per cell; closed-form sum %.12g (%.2g %% off)", tK, got, want, 100*(got-want)/want)
		}
	}
	if r.ZeroExcluded != 1 {
		t.Errorf("left out %d modes; want Γ's only", r.ZeroExcluded)
	}
}

// TestThetaStatus: θ_D(T) of the fcc example is reported only where the
// grid determines it. At T = 0 it is the elastic θ_D, the T → 0 limit
// (Kittel ch. 5). On every grid, every θ_D reported as determined lies
// within ThetaRelTol of the 64³ grid's at the same temperature (where that
// is determined; the 64³ values at 5–50 K differ from 32³ by < 0.4 %), and
// on the mode sum at 5 K the 64³ value is within 1 % of the elastic θ_D.
// Below 2 K no grid up to 64³ resolves the thermal modes (the lowest grid
// mode is ≥ 3.7 k_BT/h, and Γ's left-out acoustic modes shift θ by > 1 %).
func TestThetaStatus(t *testing.T) {
	temps := []float64{0, 0.5, 1, 2, 5, 10, 20, 50}
	type run struct {
		mesh  int
		route ThermalRoute
		r     *ThermalResult
	}
	var runs []run
	for _, side := range []int{8, 32, 64} {
		m, g := testmodels.Grid(t, "fcc", mesh.GridSpec{Mesh: [3]int{side, side, side}}, physics.GridOptions{})
		for _, route := range []ThermalRoute{ModeSum, DOSIntegral} {
			runs = append(runs, run{side, route, mustThermal(t, m, g, ThermalOptions{TempsK: temps, Route: route})})
		}
	}
	ref := runs[4].r // 64³ mode sum
	if p := ref.Points[4]; p.ThetaDStatus != ThetaDetermined || testmodels.RelDiff(p.ThetaDK, ref.ThetaElasticK) > 0.01 {
		t.Errorf("64³, 5 K: θ_D %.2f K (%v); want within 1 %% of the elastic %.2f K", p.ThetaDK, p.ThetaDStatus, ref.ThetaElasticK)
	}
	for _, rn := range runs {
		for i, p := range rn.r.Points {
			switch {
			case p.TempK == 0:
				if p.ThetaDStatus != ThetaElasticLimit || p.ThetaDK != rn.r.ThetaElasticK {
					t.Errorf("%d³ %v, 0 K: θ_D %g (%v); want the elastic limit %g", rn.mesh, rn.route, p.ThetaDK, p.ThetaDStatus, rn.r.ThetaElasticK)
				}
			case p.TempK <= 2:
				if p.ThetaDStatus != ThetaGridTooCoarse || p.ThetaDK != 0 || !strings.Contains(p.ThetaDReason, "too coarse") {
					t.Errorf("%d³ %v, %g K: θ_D %g (%v, %q); want not determined, grid too coarse", rn.mesh, rn.route, p.TempK, p.ThetaDK, p.ThetaDStatus, p.ThetaDReason)
				}
			case p.ThetaDStatus == ThetaDetermined:
				if rp := ref.Points[i]; rp.ThetaDStatus == ThetaDetermined && testmodels.RelDiff(p.ThetaDK, rp.ThetaDK) > ThetaRelTol {
					t.Errorf("%d³ %v, %g K: θ_D %.2f K reported, 64³ mode sum %.2f K", rn.mesh, rn.route, p.TempK, p.ThetaDK, rp.ThetaDK)
				}
			default:
				if p.ThetaDK != 0 || p.ThetaDReason == "" {
					t.Errorf("%d³ %v, %g K: θ_D %g (%v) with reason %q; want 0 and a reason", rn.mesh, rn.route, p.TempK, p.ThetaDK, p.ThetaDStatus, p.ThetaDReason)
				}
			}
		}
	}
	// The finest grids determine θ_D from 5 K (mode sum) and 10 K (DOS).
	if runs[4].r.Points[4].ThetaDStatus != ThetaDetermined || runs[5].r.Points[5].ThetaDStatus != ThetaDetermined {
		t.Errorf("64³: θ_D at 5 K (mode sum) %v, at 10 K (DOS) %v; want both determined",
			runs[4].r.Points[4].ThetaDStatus, runs[5].r.Points[5].ThetaDStatus)
	}
}

// TestThetaIllConditioned: a chain whose springs are 1e-12 of the example's
// has an elastic θ_D of 4.6e-4 K; at 1000 K its heat capacity per mode is
// 1 − 1e-14, so close to the classical limit that rounding of the sums
// alone (1e-11 relative) leaves θ undetermined: reported as
// ill-conditioned, not as a number (the Debye inversion, d ln θ/d ln(1 − c)
// = ½ there). At 1e-5 K (T/θ ≈ 0.02) on 10 000 points it is determined and
// within 1 % of the elastic θ_D (Kittel ch. 5: the low-T limit).
func TestThetaIllConditioned(t *testing.T) {
	c := testmodels.Load(t, "chain")
	c.Springs[0].KLong *= 1e-12
	m := testmodels.Compile(t, c)
	g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{10000}}, physics.GridOptions{})
	r := mustThermal(t, m, g, ThermalOptions{TempsK: []float64{1e-5, 1000}})
	if p := r.Points[1]; p.ThetaDStatus != ThetaIllConditioned || p.ThetaDK != 0 || p.ThetaDReason == "" {
		t.Errorf("1000 K: θ_D %g K (%v, %q); want ill-conditioned", p.ThetaDK, p.ThetaDStatus, p.ThetaDReason)
	}
	if p := r.Points[0]; p.ThetaDStatus != ThetaDetermined || testmodels.RelDiff(p.ThetaDK, r.ThetaElasticK) > 0.01 {
		t.Errorf("1e-5 K: θ_D %g K (%v, %q); want determined, within 1 %% of the elastic %g K", p.ThetaDK, p.ThetaDStatus, p.ThetaDReason, r.ThetaElasticK)
	}
}

// TestMSDDivergentFlag: ⟨u²⟩ of an infinite crystal diverges in one
// dimension at any T (zero-point included) and in two at T > 0 (Peierls,
// Helv. Phys. Acta 7, 81 (1934); Mermin & Wagner, Phys. Rev. Lett. 17, 1133
// (1966)); the grid sums are then flagged, and the chain's grows with the
// grid as N at T > 0 (ratio 2 for twice the points, to 3 %) and as ln N
// at T = 0. Three dimensions, a chain pinned to its sites (no acoustic
// zero modes) and a finite crystal are never flagged.
func TestMSDDivergentFlag(t *testing.T) {
	temps := []float64{0, 300}
	msd := func(name string, spec mesh.GridSpec) *ThermalResult {
		m, g := testmodels.Grid(t, name, spec, physics.GridOptions{Eigenvectors: true})
		return mustThermal(t, m, g, ThermalOptions{TempsK: temps, MSD: true})
	}
	check := func(what string, r *ThermalResult, want []bool) {
		t.Helper()
		for i, p := range r.Points {
			for s, u := range p.MSD {
				if u.Divergent != want[i] || (u.DivergentReason != "") != want[i] {
					t.Errorf("%s, %g K, site %d: divergent %v (%q); want %v", what, p.TempK, s, u.Divergent, u.DivergentReason, want[i])
				}
			}
		}
	}
	a := msd("chain", mesh.GridSpec{Mesh: [3]int{500}})
	b := msd("chain", mesh.GridSpec{Mesh: [3]int{1000}})
	check("chain", a, []bool{true, true})
	if ratio := b.Points[1].MSD[0].UIso / a.Points[1].MSD[0].UIso; math.Abs(ratio-2) > 0.06 {
		t.Errorf("chain, 300 K: ⟨u²⟩ on 1000 / 500 points = %.4f; want ≈ 2 (∝ N)", ratio)
	}
	if !(b.Points[0].MSD[0].UIso > a.Points[0].MSD[0].UIso) {
		t.Errorf("chain, 0 K: ⟨u²⟩ %g on 1000 points, %g on 500; want it to grow (∝ ln N)", b.Points[0].MSD[0].UIso, a.Points[0].MSD[0].UIso)
	}
	t.Logf("chain ⟨u²⟩/3 at 300 K: %.4g Å² (500 points), %.4g Å² (1000 points)", a.Points[1].MSD[0].UIso, b.Points[1].MSD[0].UIso)
	check("square net", msd("square-net", mesh.GridSpec{Mesh: [3]int{16, 16}}), []bool{false, true})
	check("fcc", msd("fcc", mesh.GridSpec{Mesh: [3]int{6, 6, 6}}), []bool{false, false})
	check("finite chain", msd("chain", mesh.GridSpec{Mesh: [3]int{100}, Finite: true}), []bool{false, false})

	pinned := &physics.Crystal{
		Name: "pinned-chain", Lattice: [][3]float64{{2.5, 0, 0}}, Polarizations: 1,
		Sites: []physics.Site{{Label: "A", MassAmu: 40, Frac: []float64{0}}},
		Blocks: []physics.Block{
			{From: 0, To: 0, Cell: []int{1}, Phi: []float64{-1, 0, 0, 0, -1, 0, 0, 0, -1}},
			{From: 0, To: 0, Cell: []int{0}, Phi: []float64{3, 0, 0, 0, 3, 0, 0, 0, 3}},
		},
	}
	m := testmodels.Compile(t, pinned)
	g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{100}}, physics.GridOptions{Eigenvectors: true})
	check("pinned chain", mustThermal(t, m, g, ThermalOptions{TempsK: temps, MSD: true}), []bool{false, false})
}
