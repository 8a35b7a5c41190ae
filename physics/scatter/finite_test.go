package scatter

import (
	"context"
	"errors"
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// softFCC is the fcc example with its force constants times 2⁻³²⁰: every
// frequency times 2⁻¹⁶⁰ ≈ 6.8e-49 (ν ∝ √(k/m)), the eigenvectors the
// same.
func softFCC(t *testing.T) (normal, soft *physics.Model) {
	c := testmodels.Load(t, "fcc")
	s := testmodels.Load(t, "fcc")
	for i := range s.Shells {
		s.Shells[i].KLong *= 0x1p-320
		s.Shells[i].KTrans *= 0x1p-320
	}
	return testmodels.Compile(t, c), testmodels.Compile(t, s)
}

// TestSoftModelLines: at T = 0 with W = 0, a line's weight ħ²|F_s|²/(2E_s)
// scales as 1/E_s with the same amplitudes F_s, so the soft crystal's lines
// are the fcc example's times 2¹⁶⁰ at energies times 2⁻¹⁶⁰ (derived from
// the line weight of doc.go; 1e-9 relative: the frequencies agree to
// rounding). Every number of the results is finite, single crystal and
// weighted DOS, at 0 and 300 K (the weighted DOS of this crystal was NaN
// when the tetrahedron counts underflowed).
func TestSoftModelLines(t *testing.T) {
	normal, soft := softFCC(t)
	qs := []QSample{{Q: [3]float64{0.13, -0.41, 0.27}}, {Q: [3]float64{1.3, 0.2, -0.7}}}
	opt := Options{Sites: sitesOf(normal, 5), DebyeWaller: DWOptions{Off: true}, Axis: Axis{Unit: physics.MeV}}
	ref, err := ComputeSingle(context.Background(), normal, qs, opt)
	if err != nil {
		t.Fatal(err)
	}
	got, err := ComputeSingle(context.Background(), soft, qs, opt)
	if err != nil {
		t.Fatal(err)
	}
	for i := range qs {
		r, g := ref.Points[i].Lines, got.Points[i].Lines
		for k := range r.EnergyMeV {
			if e := g.EnergyMeV[k] * 0x1p160; math.Abs(e/r.EnergyMeV[k]-1) > 1e-9 {
				t.Errorf("Q %v mode %d: energy·2¹⁶⁰ %v, want %v", qs[i].Q, k, e, r.EnergyMeV[k])
			}
			if w := g.Creation[k] * 0x1p-160; math.Abs(w/r.Creation[k]-1) > 1e-9 {
				t.Errorf("Q %v mode %d: weight·2⁻¹⁶⁰ %v, want %v", qs[i].Q, k, w, r.Creation[k])
			}
		}
	}
	for _, tempK := range []float64{0, 300} {
		for _, dwOff := range []bool{true, false} {
			o := opt
			o.TempK, o.DebyeWaller = tempK, DWOptions{Off: dwOff, Mesh: [3]int{4, 4, 4}}
			s, err := ComputeSingle(context.Background(), soft, qs, o)
			if err != nil && !errors.Is(err, ErrOverflow) {
				t.Fatalf("%v K, Debye–Waller off %v: %v", tempK, dwOff, err)
			}
			for _, p := range s.Points {
				if !allFinite(p.S) || !allFinite(p.Lines.Creation) || !allFinite(p.Lines.Annihilation) {
					t.Errorf("%v K, Debye–Waller off %v, Q %v: a number not finite in %v", tempK, dwOff, p.Q, p.S)
				}
			}
		}
		o := opt
		o.TempK = tempK
		w, err := ComputeWeightedDOS(context.Background(), soft, mesh.GridSpec{Mesh: [3]int{6, 6, 6}}, o)
		if err != nil {
			t.Fatal(err)
		}
		if !allFinite(w.Weighted) || !allFinite(w.Normalized) {
			t.Errorf("%v K: weighted DOS not finite: %v", tempK, w.Weighted)
		}
	}
}

// TestOptionBounds: a step or FWHM below MinEnergy, a |Q| FWHM below it, a
// length below MinScatter and a falling-with-Q exponent of the wrong sign
// are refused, each under its own field, all at once.
func TestOptionBounds(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	sites := []SiteScatterer{{CoherentFm: 1e-7, FormFactor: FormFactor{A: [4]float64{2, 3}, B: [4]float64{1, -1}}}}
	opt := Options{Sites: sites, Axis: Axis{Min: 0, Max: 1, Step: 1e-13, Unit: physics.MeV}, Resolution: Resolution{FWHM: []float64{1e-13}, QFWHM: 1e-13}}
	_, err := ComputeSingle(context.Background(), m, []QSample{{Q: [3]float64{0.1}}}, opt)
	var ve *physics.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("got %v, want a validation error", err)
	}
	got := map[string]bool{}
	for _, v := range ve.Violations {
		got[v.Field] = true
	}
	for _, f := range []string{"sites[0]", "sites[0].form_factor.b_a2[1]", "energy.step", "resolution.q_fwhm_inv_a"} {
		if !got[f] {
			t.Errorf("no violation of %s in %v", f, ve.Violations)
		}
	}
	opt = Options{Sites: sitesOf(m, 5), Axis: Axis{Min: 0, Max: 1, Step: 0.01, Unit: physics.MeV}, Resolution: Resolution{FWHM: []float64{1e-13}}}
	_, err = ComputeSingle(context.Background(), m, []QSample{{Q: [3]float64{0.1}}}, opt)
	if !errors.As(err, &ve) || len(ve.Violations) != 1 || ve.Violations[0].Field != "resolution.fwhm" {
		t.Errorf("FWHM 1e-13: got %v, want one violation of resolution.fwhm", err)
	}
}
