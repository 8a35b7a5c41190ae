package fit

import (
	"context"
	"errors"
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/polar"
)

// polarOptions compiles with the dipole–dipole term.
func polarOptions(enforce bool) physics.Options {
	return physics.Options{LongRange: polar.Builder(), EnforceChargeNeutrality: enforce}
}

func compilePolar(t testing.TB, c *physics.Crystal, enforce bool) *physics.Model {
	t.Helper()
	m, err := physics.Compile(context.Background(), c, polarOptions(enforce))
	if err != nil {
		t.Fatalf("compile %s: %v", c.Name, err)
	}
	return m
}

// isotropicCharge ties the diagonal of both sites' charges of the two-site
// polar example to sites[0].born_charge[0]: Z_M = z·1, Z_X = −z·1, neutral
// for every z.
var isotropicCharge = []Tie{
	{Path: "sites[0].born_charge[4]", To: "sites[0].born_charge[0]"},
	{Path: "sites[0].born_charge[8]", To: "sites[0].born_charge[0]"},
	{Path: "sites[1].born_charge[0]", To: "sites[0].born_charge[0]", Ratio: -1},
	{Path: "sites[1].born_charge[4]", To: "sites[0].born_charge[0]", Ratio: -1},
	{Path: "sites[1].born_charge[8]", To: "sites[0].born_charge[0]", Ratio: -1},
}

// polarQ are wavevectors of the polar example: general ones, and two
// small ones along [100] and [111] (fractional), where the LO branch
// carries the non-analytic term almost whole.
var polarQ = [][3]float64{{0.13, 0.21, 0.07}, {0.4, 0.1, 0.33}, {0.27, 0.45, 0.18}, {0.01, 0, 0}, {0.01, 0.01, 0.01}, {0.5, 0.5, 0}}

// TestRecoversPolarCharge: exact frequencies of the polar rock-salt-like
// example (its own model, proto/examples) give back its charge z = 1.5 e
// (tied ±, so neutral) and its nearest-neighbour k_long = 30 N/m to 1e-8
// from a start 20 % off. Data: labelled dispersion points away from Γ
// (the LO–TO splitting enters through the small-q points) and the
// optical frequencies at Γ, which are the analytic D(Γ)'s — the
// transverse optical modes, as infrared absorption sees them (Γ data
// carry no direction). The values are the model's own (derived in the
// test), so the fit must reach them exactly.
func TestRecoversPolarCharge(t *testing.T) {
	truth := testmodels.LoadPolar(t, "polar-rocksalt-like")
	m := compilePolar(t, truth, false)
	start := cloneForces(truth)
	setPath(t, start, "shells[0].k_long", 24)
	for _, tie := range isotropicCharge {
		setPath(t, start, tie.Path, 0) // replaced by the ties
	}
	setPath(t, start, "sites[0].born_charge[0]", 1.2)
	p := &Problem{Crystal: start, Options: polarOptions(false), Free: free("sites[0].born_charge[0]", "shells[0].k_long"), Ties: isotropicCharge,
		Frequencies: dispersion(m, polarQ, true, func(float64) float64 { return 0.02 })}
	nu := m.FrequenciesTHz([3]float64{})
	for b := 4; b <= 6; b++ {
		p.GammaFrequencies = append(p.GammaFrequencies, GammaFrequency{FreqTHz: nu[b-1], SigmaTHz: 0.02, Branch: b})
	}
	res := fitOK(t, p)
	if !res.Converged {
		t.Errorf("not converged: %s", res.Stop)
	}
	for i, want := range []float64{1.5, 30} {
		if e := relErr(res.Params[i].Value, want); e > 1e-8 {
			t.Errorf("%s = %.12g, want %g (relative error %.2g > 1e-8)", res.Params[i].Path, res.Params[i].Value, want, e)
		}
	}
	if z := res.Crystal.Sites[1].BornCharge[8]; relErr(z, -1.5) > 1e-8 {
		t.Errorf("fitted Z_X,zz = %v, want −1.5 (the tie)", z)
	}
	if !res.Model.Polar() || res.Model.ChargeNeutralityViolation() > 1e-12 {
		t.Errorf("fitted model polar %v, neutrality violation %g; want polar and neutral", res.Model.Polar(), res.Model.ChargeNeutralityViolation())
	}
	// The LO mode approached along [100] is the truth's: the fitted model
	// carries the dipole term with the fitted charge.
	want, _ := m.ModesToward([3]float64{}, [3]float64{1, 0, 0})
	got, _ := res.Model.ModesToward([3]float64{}, [3]float64{1, 0, 0})
	if e := relErr(got[5], want[5]); e > 1e-8 {
		t.Errorf("fitted LO at Γ along [100]: %v THz, want %v", got[5], want[5])
	}
}

// polarDerivativeProblem frees charge parameters of every shape on the
// polar example — the isotropic tied charge, an off-diagonal element tied
// to its transpose, a lone diagonal element (non-neutral without
// enforcement) — and a shell constant, against frequencies along the
// zone, at Γ and heat capacities on a grid; every datum labelled.
func polarDerivativeProblem(t testing.TB, enforce bool) *Problem {
	c := testmodels.LoadPolar(t, "polar-rocksalt-like")
	c.Sites[0].BornCharge[1], c.Sites[0].BornCharge[3] = 0.3, 0.3
	c.Sites[1].BornCharge[1], c.Sites[1].BornCharge[3] = -0.3, -0.3
	m := compilePolar(t, c, enforce)
	ties := append([]Tie{{Path: "sites[0].born_charge[3]", To: "sites[0].born_charge[1]"}}, isotropicCharge...)
	p := &Problem{Crystal: c, Options: polarOptions(enforce), Ties: ties,
		Free:        free("sites[0].born_charge[0]", "sites[0].born_charge[1]", "sites[1].born_charge[2]", "shells[0].k_long"),
		Frequencies: dispersion(m, polarQ[:3], true, func(float64) float64 { return 0.01 })}
	for b := 4; b <= 6; b++ {
		p.GammaFrequencies = append(p.GammaFrequencies, GammaFrequency{FreqTHz: 5, SigmaTHz: 0.1, Branch: b})
	}
	pts := []HeatCapacity{{TempK: 30, Value: 1, Sigma: 0.1}, {TempK: 150, Value: 10, Sigma: 0.1}}
	p.HeatCapacities = []HeatCapacitySet{{Grid: mesh.GridSpec{Mesh: [3]int{3, 3, 3}, Shifted: true}, Basis: PerMolAtoms, Points: pts}}
	return p
}

// TestChargeDerivativesAgainstFiniteDifferences: ∂(datum)/∂(charge) of
// the quadratic form of charges.go agrees with a central difference,
// step 1e-5 of the parameter, to 1e-6 relative on every data kind that a
// polar fit takes (frequencies along the zone and at Γ, heat capacities),
// with and without charge neutrality enforced (the derivative then passes
// through the projection Z − mean(Z)). Tolerances as
// TestDerivativesAgainstFiniteDifferences.
func TestChargeDerivativesAgainstFiniteDifferences(t *testing.T) {
	for _, enforce := range []bool{false, true} {
		p := polarDerivativeProblem(t, enforce)
		ctx := testmodels.Ctx(t)
		var vs physics.Violations
		params := p.params(&vs)
		if vs.Len() > 0 {
			t.Fatal(vs.Err())
		}
		ev, err := newEvaluator(ctx, p, params)
		if err != nil {
			t.Fatal(err)
		}
		x0 := startVector(params)
		e0, err := ev.eval(ctx, x0)
		if err != nil {
			t.Fatal(err)
		}
		np := len(params)
		covered := map[string]bool{}
		for j := range params {
			h := 1e-5 * math.Max(math.Abs(x0[j]), 0.1)
			xp, xm := append([]float64(nil), x0...), append([]float64(nil), x0...)
			xp[j] += h
			xm[j] -= h
			ep, err1 := ev.eval(ctx, xp)
			em, err2 := ev.eval(ctx, xm)
			if err1 != nil || err2 != nil {
				t.Fatalf("%s ± h: %v %v", params[j].name, err1, err2)
			}
			for i, r := range ev.rows {
				a := e0.jac[i*np+j]
				fd := (ep.value[i] - em.value[i]) / (2 * h)
				rowMax := 0.0
				for k := 0; k < np; k++ {
					rowMax = math.Max(rowMax, math.Abs(e0.jac[i*np+k]))
				}
				noise := 8 * 0x1p-52 * math.Max(math.Abs(ep.value[i]), math.Abs(em.value[i])) / (2 * h)
				if math.Abs(a-fd) > 1e-6*math.Abs(a)+1e-9*rowMax+noise {
					t.Errorf("enforce %v: ∂%s/∂%s: analytic %.10g, central difference %.10g (relative %.2g)", enforce, r.field, params[j].name, a, fd, relErr(a, fd))
				}
				if params[j].members[0].path.isCharge() && a != 0 {
					covered[kindOf(r.field)] = true
				}
			}
		}
		if len(covered) != 3 {
			t.Errorf("enforce %v: charge derivatives non-zero on %v; want frequencies, gamma_frequencies, heat_capacities", enforce, covered)
		}
	}
}

// TestChargeModelMatchesCompile: D(x) of the quadratic form equals the
// dynamical matrix of the model compiled at x (charges and spring moved
// together) to rounding, 1e-12 of its largest element — the exactness of
// the polarisation identity on a bilinear term.
func TestChargeModelMatchesCompile(t *testing.T) {
	p := polarDerivativeProblem(t, false)
	ctx := testmodels.Ctx(t)
	var vs physics.Violations
	params := p.params(&vs)
	ev, err := newEvaluator(ctx, p, params)
	if err != nil {
		t.Fatal(err)
	}
	x := []float64{2.1, -0.4, 0.7, 27}
	c, m, err := ev.model(ctx, x)
	if err != nil || c == nil {
		t.Fatal(err)
	}
	for _, q := range [][3]float64{{0.13, 0.21, 0.07}, {0, 0, 0}, {0.5, 0, 0.25}} {
		want := m.DynamicalMatrix(q, nil)
		got := ev.lin.combine(ev.lin.matrices(q, nil), x, nil)
		big, diff := 0.0, 0.0
		for k := range want {
			big = math.Max(big, cmplxAbs(want[k]))
			diff = math.Max(diff, cmplxAbs(got[k]-want[k]))
		}
		if diff > 1e-12*big {
			t.Errorf("q %v: |D(x) − D(compiled at x)| = %.3g, largest element %.3g", q, diff, big)
		}
	}
}

func cmplxAbs(z complex128) float64 { return math.Hypot(real(z), imag(z)) }

// TestPolarRefusals: what a polar fit cannot do is refused with its field
// path — long-wave data (the fit's long-wave limit is short-range only),
// a charge path on a model without charges, a tie joining a charge and a
// force constant, a charge bound beyond the largest Born charge.
func TestPolarRefusals(t *testing.T) {
	c := testmodels.LoadPolar(t, "polar-rocksalt-like")
	m := compilePolar(t, c, false)
	data := dispersion(m, polarQ[:1], true, func(float64) float64 { return 0.01 })
	cases := []struct {
		name  string
		p     *Problem
		field string
	}{
		{"sound velocities", &Problem{Crystal: c, Options: polarOptions(false), Free: free("shells[0].k_long"), Frequencies: data,
			SoundVelocities: []Velocity{{Dir: [3]float64{1, 0, 0}, KmS: 3, SigmaKmS: 0.1, Branch: 1}}}, "sound_velocities"},
		{"elastic constants", &Problem{Crystal: c, Options: polarOptions(false), Free: free("shells[0].k_long"), Frequencies: data,
			ElasticConstants: []ElasticConstant{{I: 1, J: 1, GPa: 50, SigmaGPa: 1}}}, "elastic_constants"},
		{"no charges", &Problem{Crystal: testmodels.Load(t, "rocksalt-like"), Free: free("sites[0].born_charge[0]"), Frequencies: data}, "free[0].path"},
		{"mixed tie", &Problem{Crystal: c, Options: polarOptions(false), Free: free("shells[0].k_long"), Frequencies: data,
			Ties: []Tie{{Path: "sites[0].born_charge[0]", To: "shells[0].k_long"}}}, "ties[0].to"},
		{"charge bound", &Problem{Crystal: c, Options: polarOptions(false), Frequencies: data,
			Free: []Free{{Path: "sites[0].born_charge[0]", Upper: 200, HasUpper: true}}}, "free[0].upper"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Fit(testmodels.Ctx(t), tc.p)
			var ve *physics.ValidationError
			if !asValidationErr(err, &ve) {
				t.Fatalf("err %v; want a validation error on %s", err, tc.field)
			}
			found := false
			for _, v := range ve.Violations {
				found = found || v.Field == tc.field
			}
			if !found {
				t.Errorf("violations %v; want one on %s", ve.Violations, tc.field)
			}
		})
	}
}

func asValidationErr(err error, target **physics.ValidationError) bool { return errors.As(err, target) }
