package transport

import (
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// The isotropic test crystal: a = 3 Å, 40 u, k = 2 eV/Å² (helpers_test.go).
const isoA, isoMass, isoK = 3.0, 40.0, 2.0

// Casimir's limit (Casimir, Physica 5, 495 (1938)): with boundary
// scattering alone every mode's mean free path is the sample size L, so
// κ = (1/3) Σ_s C_s c_s L. At low T only long acoustic waves are excited,
// and per branch of sound velocity c_s the Debye heat capacity per volume
// is C_s = (2π²/15) k_B (k_BT/ħc_s)³ (from U_s = π²(k_BT)⁴/(30ħ³c_s³);
// Kittel ch. 5, Ashcroft & Mermin ch. 23), hence
//
//	κ → (L/3)(2π²/15)(k_B⁴T³/ħ³) Σ_s c_s⁻²,  Σ_s c_s⁻² = c_L⁻² + 2c_T⁻²,
//
// with c_L, c_T of isoCrystal derived from its springs (helpers_test.go).
// The grid must resolve the thermal wavevectors (64³, shifted off Γ) and T
// be low enough that dispersion is negligible (T/θ_D ≈ 1 %): 6 and 8 K.
// Both within 1 %; the exponent of T fitted on 5–8 K within 0.1 of 3.
func TestCasimirLimit(t *testing.T) {
	const L = 1e-3 // m
	m := compile(t, isoCrystal(isoA, isoMass, isoK, "X"))
	cL, cT := isoSpeeds(isoA, isoMass, isoK)
	temps := []float64{5, 6, 7, 8}
	res, err := Compute(testCtx(t), m, Options{Grid: mesh.GridSpec{Mesh: [3]int{64, 64, 64}, Shifted: true}, TempsK: temps,
		Boundaries: []Boundary{{Kind: Grain, SizeM: L}}})
	if err != nil {
		t.Fatal(err)
	}
	kb, hb := physics.BoltzmannJPerK, physics.ReducedPlanckJS
	var ks []float64
	for i, p := range res.Series[0].Points {
		T := temps[i]
		want := L / 3 * 2 * math.Pi * math.Pi / 15 * math.Pow(kb, 4) * T * T * T / (hb * hb * hb) * (1/(cL*cL) + 2/(cT*cT))
		t.Logf("T = %g K: κ = %.5g W/(m·K), Casimir–Debye %.5g, ratio %.4f; κ_xy %.2g", T, p.MeanWmK, want, p.MeanWmK/want, p.KappaWmK[1])
		if (T == 6 || T == 8) && math.Abs(p.MeanWmK/want-1) > 0.01 {
			t.Errorf("T = %g K: κ/κ_Casimir = %.4f, want 1 within 1 %%", T, p.MeanWmK/want)
		}
		// Cubic: isotropic κ. Within 1e-6: degenerate modes at the grid's
		// symmetric points are split along one generic direction for their
		// velocities (physics/velocity.go), which is not cubic (measured
		// 1e-7 relative).
		if math.Abs(p.KappaWmK[0]-p.KappaWmK[4]) > 1e-6*p.MeanWmK || math.Abs(p.KappaWmK[1]) > 1e-6*p.MeanWmK {
			t.Errorf("T = %g K: κ = %v is not isotropic (cubic crystal)", T, p.KappaWmK)
		}
		ks = append(ks, p.MeanWmK)
	}
	if e := slope(temps, ks); math.Abs(e-3) > 0.1 {
		t.Errorf("κ ∝ T^%.3f at low T, boundary-limited; want T³", e)
	} else {
		t.Logf("boundary-limited exponent %.4f (T³)", e)
	}
}

// Umklapp alone at high T: every mode's heat capacity is k_B and its rate
// ∝ T e^(−θ/3T) (Umklapp's form), so κ ∝ e^(θ/3T)/T and between T₁ and
// T₂ the exponent is −1 + (θ/3)(1/T₂ − 1/T₁)/ln(T₂/T₁) (derived; → −1).
// The heat capacities' own decline, 1 − x²/12, shifts it by less than
// 0.002 at T ≥ 10θ_D. Fitted within 0.005.
func TestUmklappHighTemperature(t *testing.T) {
	m := compile(t, isoCrystal(isoA, isoMass, isoK, "X"))
	thetaD, err := m.ElasticDebyeTemperature(testCtx(t))
	if err != nil {
		t.Fatal(err)
	}
	temps := []float64{10 * thetaD, 40 * thetaD}
	res, err := Compute(testCtx(t), m, Options{Grid: mesh.GridSpec{Mesh: [3]int{8, 8, 8}}, TempsK: temps, Umklapp: Umklapp{On: true, Gamma: 1.5}})
	if err != nil {
		t.Fatal(err)
	}
	th := res.ThetaK // θ_a = θ_D for one site
	want := -1 + th/3*(1/temps[1]-1/temps[0])/math.Log(temps[1]/temps[0])
	got := slope(temps, []float64{res.Series[0].Points[0].MeanWmK, res.Series[0].Points[1].MeanWmK})
	t.Logf("θ = %.1f K, v̄ = %.3f km/s; κ(10θ) = %.4g, κ(40θ) = %.4g W/(m·K); exponent %.5f, want %.5f",
		th, res.VelocityKmS, res.Series[0].Points[0].MeanWmK, res.Series[0].Points[1].MeanWmK, got, want)
	if math.Abs(got-want) > 0.005 {
		t.Errorf("exponent %.5f, want %.5f (κ ∝ 1/T)", got, want)
	}
	if rel := math.Abs(th-thetaD) / thetaD; rel > 1e-12 {
		t.Errorf("θ_a = %g, want θ_D = %g for one site", th, thetaD)
	}
	cL, cT := isoSpeeds(isoA, isoMass, isoK)
	vbar := math.Cbrt(3/(1/(cL*cL*cL)+2/(cT*cT*cT))) / 1e3
	if math.Abs(res.VelocityKmS-vbar) > 1e-3*vbar {
		t.Errorf("v̄ = %g km/s, want the Debye mean %g (3/v̄³ = c_L⁻³ + 2c_T⁻³)", res.VelocityKmS, vbar)
	}
}

// Klemens' point-defect rate V_a Γ ω⁴/(4π v̄³), 3/v̄³ = c_L⁻³ + 2c_T⁻³
// (Klemens, Proc. Phys. Soc. A 68, 1113 (1955)), is the low-frequency form
// of Tamura's (π/6)V_a Γ ω² g(ω) (Tamura, Phys. Rev. B 27, 858 (1983)).
// In the elastic limit (below three times the grid's lowest mode) the rate
// must equal it (1e-9); in the band resolved by the tetrahedron DOS of a
// 64³ grid up to 1.5 THz (ν_D ≈ 15 THz) its ω⁴ law holds within 5 % and the
// fitted exponent within 0.15 of 4.
func TestKlemensOmega4(t *testing.T) {
	const gamma = 1e-3
	m := compile(t, isoCrystal(isoA, isoMass, isoK, "X"))
	cL, cT := isoSpeeds(isoA, isoMass, isoK)
	va := isoA * isoA * isoA * 1e-30
	klemens := func(f float64) float64 {
		w := 2 * math.Pi * f * 1e12
		return va * gamma * w * w * w * w / (4 * math.Pi) * (1/(cL*cL*cL) + 2/(cT*cT*cT)) / 3
	}
	rate, err := DefectRate(testCtx(t), m, mesh.GridSpec{Mesh: [3]int{64, 64, 64}}, gamma)
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range []float64{0.01, 0.05, 0.1, 0.3, 0.6} {
		if r := rate(f) / klemens(f); math.Abs(r-1) > 1e-9 {
			t.Errorf("ν = %g THz: rate/Klemens = %.12f, want 1", f, r)
		}
	}
	var fs, rs []float64
	for f := 1.05; f <= 1.5; f += 0.05 {
		r := rate(f)
		if q := r / klemens(f); math.Abs(q-1) > 0.05 {
			t.Errorf("ν = %.2f THz: rate/Klemens = %.4f", f, q)
		}
		fs, rs = append(fs, f), append(rs, r)
	}
	if e := slope(fs, rs); math.Abs(e-4) > 0.15 {
		t.Errorf("point-defect rate ∝ ω^%.3f, want ω⁴", e)
	} else {
		t.Logf("point-defect rate ∝ ω^%.4f on 1.05–1.5 THz", e)
	}
}

// Natural silicon and germanium: g₂ = 2.01e-4 and 5.87e-4 (Tamura, Phys.
// Rev. B 27, 858 (1983), Table I — from memory), from the built-in table.
func TestIsotopeMassVariance(t *testing.T) {
	for _, c := range []struct {
		label string
		want  float64
	}{{"Si", 2.01e-4}, {"Ge1", 5.87e-4}} {
		g, err := SiteMassVariance(c.label)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(g/c.want-1) > 0.01 {
			t.Errorf("%s: g₂ = %.4e, want %.3e", c.label, g, c.want)
		}
	}
	for _, el := range KnownElements() {
		iso, _ := NaturalIsotopes(el)
		var tot float64
		for _, x := range iso {
			tot += x.AbundancePct
		}
		if math.Abs(tot-100) > 1e-3 {
			t.Errorf("%s: abundances sum to %g %%", el, tot)
		}
	}
	if _, err := SiteMassVariance("Qq"); err == nil {
		t.Error("an unknown element gave no error")
	}
}

// A specular fraction p acts as the size L(1+p)/(1−p) with diffuse
// surfaces (the factor (1−p)/(1+p), Berman, Foster & Ziman 1955): equal to
// rounding. A film conducts less across (its normal, z) than along it, and
// a thick film tends to the bulk with the other mechanisms.
func TestFilmAndSpecularity(t *testing.T) {
	m := compile(t, isoCrystal(isoA, isoMass, isoK, "X"))
	const p, L = 0.4, 50e-9
	base := Options{Grid: mesh.GridSpec{Mesh: [3]int{10, 10, 10}}, TempsK: []float64{50, 300}, PowerLaw: PowerLaw{On: true, RatePerS: 1e9, Exponent: 2},
		Boundaries: []Boundary{
			{Kind: Film, SizeM: L, Normal: [3]float64{0, 0, 2}, Specularity: p},
			{Kind: Film, SizeM: L * (1 + p) / (1 - p), Normal: [3]float64{0, 0, 1}},
			{Kind: Film, SizeM: 1, Normal: [3]float64{0, 0, 1}},
			{Kind: Bulk}},
		CumulativeTempK: 300}
	res, err := Compute(testCtx(t), m, base)
	if err != nil {
		t.Fatal(err)
	}
	s := res.Series
	for i := range base.TempsK {
		a, b := s[0].Points[i].KappaWmK, s[1].Points[i].KappaWmK
		for x := range a {
			if math.Abs(a[x]-b[x]) > 1e-12*math.Abs(a[0]) {
				t.Fatalf("T = %g: specular film %v, diffuse film of effective size %v", base.TempsK[i], a, b)
			}
		}
		if !(a[8] < a[0]) {
			t.Errorf("film: κ_zz %g not below κ_xx %g", a[8], a[0])
		}
		if thick, bulk := s[2].Points[i].MeanWmK, s[3].Points[i].MeanWmK; math.Abs(thick/bulk-1) > 1e-4 {
			t.Errorf("1 m film %g vs bulk %g", thick, bulk)
		}
	}
	for _, se := range s {
		c := se.Cumulative
		k := se.Points[1].MeanWmK
		if math.Abs(c.KappaByMFP[len(c.KappaByMFP)-1]-k) > 1e-9*k || math.Abs(c.KappaByFreq[len(c.KappaByFreq)-1]-k) > 1e-9*k {
			t.Errorf("%v: cumulative curves end at %g and %g, κ = %g", se.Boundary.Kind, c.KappaByMFP[len(c.KappaByMFP)-1], c.KappaByFreq[len(c.KappaByFreq)-1], k)
		}
		for i := 1; i < len(c.MFPM); i++ {
			if c.KappaByMFP[i] < c.KappaByMFP[i-1] || c.MFPM[i] < c.MFPM[i-1] {
				t.Fatalf("cumulative κ by mean free path is not monotone at %d", i)
			}
		}
	}
}

func TestConductivityRefusesBadInput(t *testing.T) {
	m := compile(t, isoCrystal(isoA, isoMass, isoK, "Qq"))
	_, err := Compute(testCtx(t), m, Options{Grid: mesh.GridSpec{Mesh: [3]int{2, 2, 2}}, TempsK: []float64{math.NaN()},
		Boundaries: []Boundary{{Kind: Film, SizeM: -1, Specularity: 2}},
		Defects:    PointDefects{On: true},
		Umklapp:    Umklapp{On: true, GammaBranch: []float64{1}}, PowerLaw: PowerLaw{On: true, Exponent: -1}, CumulativeBins: -3})
	var ve *physics.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("err = %v, want a validation error", err)
	}
	want := map[string]bool{"temperatures_k[0]": true, "samples[0].size_m": true, "samples[0].specularity": true, "samples[0].normal": true,
		"power_law.exponent": true, "cumulative_bins": true, "umklapp.gruneisen_per_branch": true, "point_defects.site_g2": true}
	for _, v := range ve.Violations {
		delete(want, v.Field)
	}
	if len(want) > 0 {
		t.Errorf("missing %v in %v", want, err)
	}
	if _, err := Compute(testCtx(t), m, Options{Grid: mesh.GridSpec{Mesh: [3]int{2, 2, 2}}, TempsK: []float64{300}}); err == nil {
		t.Error("no scattering at all was accepted")
	}
}

// TestConductivityOutOfRange: a point-defect variance of 10⁻³²⁰ as the
// only mechanism (a fuzzed request's) scatters every mode at a rate of
// order 10⁻³¹⁶ 1/s or less, so τ = 1/rate and κ = Σ C v v τ pass the
// largest float64 (derived: C ≈ 1 at 300 K, v ≈ 10³ m/s). Compute refuses
// it on the temperature's field (and the cumulative curves' own), all at
// once, instead of answering Inf or NaN; the same model with g₂ = 10⁻⁴
// is answered with a finite κ.
func TestConductivityOutOfRange(t *testing.T) {
	m := compile(t, isoCrystal(isoA, isoMass, isoK, "X"))
	opt := func(g2 float64) Options {
		return Options{Grid: mesh.GridSpec{Mesh: [3]int{4, 4, 4}}, TempsK: []float64{300, 600},
			Boundaries: []Boundary{{Kind: Bulk}}, Defects: PointDefects{On: true, SiteG2: []float64{g2}}, CumulativeTempK: 300}
	}
	_, err := Compute(testCtx(t), m, opt(1e-320))
	var ve *physics.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("err = %v, want a validation error", err)
	}
	want := map[string]bool{"temperatures_k[0]": true, "temperatures_k[1]": true, "cumulative_temperature_k": true}
	for _, v := range ve.Violations {
		if !want[v.Field] || !strings.Contains(v.Description, "in samples[0]") {
			t.Errorf("unexpected violation %s: %s", v.Field, v.Description)
		}
		delete(want, v.Field)
	}
	if len(want) > 0 {
		t.Errorf("missing %v in %v", want, err)
	}
	res, err := Compute(testCtx(t), m, opt(1e-4))
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range res.Series[0].Points {
		if !finite(p.MeanWmK) || !(p.MeanWmK > 0) {
			t.Errorf("g₂ = 1e-4: κ(%g K) = %v W/(m·K), want finite and positive", p.TempK, p.MeanWmK)
		}
	}
}
