package scatter

import (
	"context"
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// TestPowderLargeQIncoherentApproximation checks the powder average of a
// one-site cubic crystal at large |Q| against the incoherent approximation
// (Squires ch. 3 and 5; Placzek & Van Hove): when the |Q| sphere crosses
// many zones it samples q evenly, and the coherent one-phonon S becomes
//
//	S(|Q|, E) → b² e^{−2W} (ħ²Q²/2M) g(E)/(3E) · (n(E) + 1)  (E > 0),
//
// g the DOS per atom (∫g = 3), 2W = Q²⟨u_x²⟩ for a cubic site, because the
// zone average of e_s e_s† is 1/3 for one cubic site. The DOS is the
// tetrahedron DOS of a 48³ grid broadened with the same resolution. A
// single sphere still samples the zone unevenly (rows at 8, 9, 10 Å⁻¹
// differ from the approximation by 14–17 % in shape, by 1–7 % in total):
// the approximation holds for the average over a band of |Q| several
// zones thick (the fcc example's zone is 2.7 Å⁻¹ across). Over 8…14 Å⁻¹
// it holds to 0.45 % (relative L1, 3–22 meV); 1 % is asked.
func TestPowderLargeQIncoherentApproximation(t *testing.T) {
	if testing.Short() {
		t.Skip("about 10 s")
	}
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	const b, tempK = 5.0, 100.0
	axis := Axis{Min: 0, Max: 24, Step: 0.2, Unit: physics.MeV}
	opt := Options{Sites: sitesOf(m, b), TempK: tempK, Axis: axis, Resolution: Resolution{FWHM: []float64{1.0}}}
	pw, err := ComputePowder(context.Background(), m, PowderOptions{QMinInvA: 8, QMaxInvA: 14, NQ: 61}, opt)
	if err != nil {
		t.Fatal(err)
	}
	gm, err := m.GridModes(context.Background(), mesh.GridSpec{Mesh: [3]int{48, 48, 48}}, physics.GridOptions{})
	if err != nil {
		t.Fatal(err)
	}
	const fine = 0.02
	dos, err := spectra.ComputeDOS(context.Background(), m, gm, spectra.DOSOptions{Unit: physics.MeV, Min: fine / 2, Max: 24, Step: fine})
	if err != nil {
		t.Fatal(err)
	}
	var vs physics.Violations
	g := resolveAxis(axis, opt.Resolution, 0, &vs)
	kT := physics.BoltzmannEVPerK * tempK * 1e3
	ux := pw.DW.U[0][0]
	got, want := make([]float64, g.n), make([]float64, g.n)
	for i, q := range pw.QInvA {
		for k, e := range dos.Freq {
			w := fm2ToBarn * b * b * math.Exp(-q*q*ux) * recoilMeV * q * q / m.MassAmu(0) * dos.DOS[k] * fine / (3 * e) * (bose(e, kT) + 1)
			g.add(want, e, w)
		}
		for k, v := range pw.S[i] {
			got[k] += v
		}
	}
	var d, s float64
	for k, e := range pw.Energies {
		if e < 3 || e > 22 {
			continue
		}
		d += math.Abs(got[k] - want[k])
		s += want[k]
	}
	t.Logf("|Q| = 8…14 Å⁻¹ (61 rows): relative L1 difference from the incoherent approximation %.4f (3–22 meV); ratios at 5, 10, 15, 20 meV: %.3f %.3f %.3f %.3f",
		d/s, got[25]/want[25], got[50]/want[50], got[75]/want[75], got[100]/want[100])
	if d/s > 0.01 {
		t.Errorf("powder average over |Q| = 8…14 Å⁻¹ differs from the incoherent approximation by %.4f (relative L1)", d/s)
	}
	// The engine's own incoherent term (addIncoherent, its DOS on the
	// Debye–Waller grid) with σ_inc = 4πb² and b = 0 is the same
	// approximation: it must meet the coherent map within the same 1 %.
	inc := opt
	inc.Sites = []SiteScatterer{{IncoherentBarn: 4 * math.Pi * b * b * fm2ToBarn}}
	pi, err := ComputePowder(context.Background(), m, PowderOptions{QMinInvA: 8, QMaxInvA: 14, NQ: 61, MaxDirections: 128}, inc)
	if err != nil {
		t.Fatal(err)
	}
	if !pi.Incoherent {
		t.Fatal("the incoherent term was not added")
	}
	incSum := make([]float64, g.n)
	for i := range pi.S {
		for k, v := range pi.S[i] {
			incSum[k] += v
		}
	}
	d, s = 0, 0
	for k, e := range pw.Energies {
		if e >= 3 && e <= 22 {
			d += math.Abs(got[k] - incSum[k])
			s += incSum[k]
		}
	}
	t.Logf("engine's incoherent term (24³ DOS): relative L1 difference from the coherent map %.4f", d/s)
	if d/s > 0.01 {
		t.Errorf("the engine's incoherent term differs from the coherent powder map over 8…14 Å⁻¹ by %.4f (relative L1)", d/s)
	}
}

// TestIncoherentFirstMoment: the incoherent one-phonon term alone (b = 0)
// obeys its first-moment sum rule ∫ E S_inc(|Q|, E) dE = (σ_inc/4π)
// e^{−2W} ħ²Q²/2M per atom at any T (Squires, Introduction to the Theory of
// Thermal Neutron Scattering, ch. 3; Placzek): each DOS bin's lines carry
// E·(n+1) − E·n = E times 1/E, and the site's DOS holds p = 3 states, which
// the 1/3 of the direction average cancels. 2W = Q²⟨u_x²⟩ for the cubic
// site. The window holds both sides of the spectrum and their tails.
func TestIncoherentFirstMoment(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	const sigma = 4.0 // barn
	for _, tempK := range []float64{0, 150} {
		opt := Options{Sites: []SiteScatterer{{IncoherentBarn: sigma}}, TempK: tempK, DebyeWaller: DWOptions{Mesh: [3]int{8, 8, 8}},
			Axis: Axis{Min: -30, Max: 30, Step: 0.02, Unit: physics.MeV}, Resolution: Resolution{FWHM: []float64{0.2}}}
		pw, err := ComputePowder(context.Background(), m, PowderOptions{QMinInvA: 1, QMaxInvA: 7, NQ: 3, MaxDirections: 128}, opt)
		if err != nil {
			t.Fatal(err)
		}
		ux := pw.DW.U[0][0]
		for i, q := range pw.QInvA {
			want := sigma / (4 * math.Pi) * recoilMeV * q * q / m.MassAmu(0) * math.Exp(-q*q*ux)
			got := 0.0
			for k, e := range pw.Energies {
				got += e * pw.S[i][k] * 0.02
			}
			if math.Abs(got/want-1) > 1e-6 {
				t.Errorf("%v K, |Q| = %v Å⁻¹: first moment %.9g, want %.9g", tempK, q, got, want)
			}
		}
		opt.Sites[0].CoherentFm = 5
		co, err := ComputePowder(context.Background(), m, PowderOptions{QMinInvA: 1, QMaxInvA: 7, NQ: 3, MaxDirections: 128, CoherentOnly: true}, opt)
		if err != nil || co.Incoherent {
			t.Fatalf("coherent only: %v, incoherent added %v", err, co != nil && co.Incoherent)
		}
	}
}
