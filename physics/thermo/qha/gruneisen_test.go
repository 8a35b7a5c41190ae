package qha_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/thermo/qha"
)

// If every force constant scales as k ∝ V^(−s) and the masses stay, every
// eigenvalue of D scales the same way, ω² ∝ V^(−s), so ω ∝ V^(−s/2) and
// γ = −d ln ω/d ln V = s/2 for every mode, exactly (derived here: D is
// linear in the force constants). ln ω is then linear in ln V, so every
// finite difference is exact too: the check is to rounding.
func TestGammaPowerLawClosedForm(t *testing.T) {
	for _, tc := range []struct {
		name string
		s    float64
		dx   []float64
		ref  int
	}{
		{"two volumes", 3, []float64{-0.01, 0.01}, -1},
		{"three volumes, central", 4.4, []float64{-0.02, 0, 0.015}, -1},
		{"five volumes, reference at the end", 2, []float64{-0.02, -0.01, 0, 0.01, 0.02}, 4},
		{"five volumes, given out of order", 3, []float64{0.02, -0.01, 0, -0.02, 0.01}, 2},
	} {
		t.Run(tc.name, func(t *testing.T) {
			set := mustSet(t, powerLawSet(t, 3, tc.s, tc.dx), tc.ref)
			g, err := qha.GridGruneisen(ctx(t), set, mesh.GridSpec{Mesh: [3]int{5, 5, 5}})
			if err != nil {
				t.Fatal(err)
			}
			undefined := 0
			for j, def := range g.Defined {
				if !def {
					undefined++
					continue
				}
				if math.Abs(g.Gamma[j]-tc.s/2) > 1e-9 {
					t.Fatalf("mode %d: γ = %.12g, want s/2 = %g", j, g.Gamma[j], tc.s/2)
				}
			}
			if undefined != 3 { // the acoustic modes at Γ
				t.Errorf("%d undefined modes, want the 3 acoustic modes at Γ", undefined)
			}
			avg, ok := g.AverageGamma([]float64{0, 10, 300})
			if ok[0] || !ok[1] || math.Abs(avg[2]-tc.s/2) > 1e-9 {
				t.Errorf("γ(T) = %v (ok %v), want undefined at 0 K and s/2 = %g after", avg, ok, tc.s/2)
			}
		})
	}
}

// Modes are followed across volumes by eigenvector overlap: in two
// non-interacting sublattices whose springs scale with different powers
// (γ_A = sA/2, γ_B = sB/2, derived as above for each sublattice), the two
// kinds' branches cross as the volume changes, so sorting frequencies would
// pair an A mode at one volume with a B mode at the next. The check: every
// mode gets the γ of its own kind.
func TestGammaFollowsCrossingBranches(t *testing.T) {
	const sA, sB = 6.0, 1.0
	a0 := 3.0
	var ms []*physics.Model
	for _, d := range []float64{-0.04, -0.02, 0, 0.02, 0.04} {
		a := a0 * (1 + d)
		x := math.Pow(a/a0, 3)
		ms = append(ms, compile(t, twoLattices(a, 1.0*math.Pow(x, -sA), 3.0*math.Pow(x, -sB))))
	}
	set := mustSet(t, ms, -1)
	rng := rand.New(rand.NewPCG(7, 11))
	var pts []mesh.QPoint
	for range 40 {
		pts = append(pts, mesh.QPoint{Q: [3]float64{rng.Float64() - 0.5, rng.Float64() - 0.5, rng.Float64() - 0.5}, Weight: 1})
	}
	g, err := qha.ModeGruneisen(ctx(t), set, pts)
	if err != nil {
		t.Fatal(err)
	}
	// Sorting alone would fail: check that the order of the two kinds
	// does change between the smallest and the largest volume somewhere.
	crossed := false
	for i, p := range pts {
		lo, hi := ms[0].FrequenciesTHz(p.Q), ms[4].FrequenciesTHz(p.Q)
		ref := g.FreqTHz[i*6 : i*6+6]
		for k := range ref {
			if math.Abs(math.Log(hi[k]/lo[k])/math.Log(set.VolA3[4]/set.VolA3[0])+sA/2) > 1e-6 &&
				math.Abs(math.Log(hi[k]/lo[k])/math.Log(set.VolA3[4]/set.VolA3[0])+sB/2) > 1e-6 {
				crossed = true
			}
		}
	}
	if !crossed {
		t.Fatal("no branch crossing in the test set: the test would not tell overlap from sorting")
	}
	for j, def := range g.Defined {
		if !def {
			t.Fatalf("mode %d undefined away from Γ", j)
		}
		if math.Abs(g.Gamma[j]-sA/2) > 1e-6 && math.Abs(g.Gamma[j]-sB/2) > 1e-6 {
			t.Fatalf("mode %d (%.4g THz): γ = %.8g, want %g or %g", j, g.FreqTHz[j], g.Gamma[j], sA/2, sB/2)
		}
	}
	if g.MinOverlap < 0.999 {
		t.Errorf("smallest overlap %.6f, want 1 (each mode keeps its eigenvector)", g.MinOverlap)
	}
}

func TestVolumeSetRefusesOtherCrystals(t *testing.T) {
	a := compile(t, scCrystal(3, 40, 2, 2))
	heavier := compile(t, scCrystal(3.1, 41, 2, 2))
	same := compile(t, scCrystal(3, 40, 2.5, 2))
	for _, tc := range []struct {
		name   string
		models []*physics.Model
		ref    int
		fields []string
	}{
		{"one model", []*physics.Model{a}, -1, []string{"models"}},
		{"another mass", []*physics.Model{a, heavier}, -1, []string{"models[1]"}},
		{"equal volumes", []*physics.Model{a, same}, -1, []string{"models[1]"}},
		{"reference out of range", []*physics.Model{a, heavier}, 5, []string{"reference"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := qha.NewVolumeSet(tc.models, tc.ref)
			ve, ok := err.(*physics.ValidationError)
			if !ok {
				t.Fatalf("err = %v, want a *physics.ValidationError", err)
			}
			var got []string
			for _, v := range ve.Violations {
				got = append(got, v.Field)
			}
			if len(got) != len(tc.fields) || got[0] != tc.fields[0] {
				t.Errorf("fields %v, want %v (%v)", got, tc.fields, err)
			}
		})
	}
}
