package fit

import (
	"fmt"
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// fixtureQ are general wavevectors of the fixture (no two branches
// within 1e-3 THz: TestFixtureStable).
var fixtureQ = [][3]float64{{0.13, 0.21, 0.07}, {0.4, 0.1, 0.33}, {0.27, 0.45, 0.18}}

// fixtureProblem fits every parameter kind of the fixture — spring k_long
// and k_trans, shell k_long and k_trans, block elements on and off the
// diagonal (the off-diagonal pair tied, so the block stays symmetric and
// the long-wave limit exists) — to every data kind, every datum labelled
// so that no assignment moves under a finite difference.
func fixtureProblem(t testing.TB) *Problem {
	c := fixture()
	m := compile(t, c)
	p := &Problem{
		Crystal: c,
		Free: free("springs[0].k_long", "springs[0].k_trans", "springs[1].kLong", "springs[2].k_trans",
			"shells[0].k_long", "shells[0].k_trans", "blocks[0].phi[0]", "blocks[0].phi[4]", "blocks[0].phi[1]", "blocks[1].phi[8]"),
		Ties:        []Tie{{Path: "blocks[0].phi[3]", To: "blocks[0].phi[1]"}},
		Frequencies: dispersion(m, fixtureQ, true, func(float64) float64 { return 0.01 }),
	}
	for b := 4; b <= 6; b++ {
		p.GammaFrequencies = append(p.GammaFrequencies, GammaFrequency{FreqTHz: 5, SigmaTHz: 0.1, Branch: b})
	}
	for _, d := range [][3]float64{{1, 0.3, 0.2}, {0.2, 1, -0.4}} {
		for b := 1; b <= 3; b++ {
			p.SoundVelocities = append(p.SoundVelocities, Velocity{Dir: d, KmS: 3, SigmaKmS: 0.1, Branch: b})
		}
	}
	for _, ij := range [][2]int{{1, 1}, {1, 2}, {2, 3}, {4, 4}, {5, 5}, {6, 6}, {1, 5}} {
		p.ElasticConstants = append(p.ElasticConstants, ElasticConstant{I: ij[0], J: ij[1], GPa: 50, SigmaGPa: 1})
	}
	pts := []HeatCapacity{{TempK: 30, Value: 1, Sigma: 0.1}, {TempK: 150, Value: 10, Sigma: 0.1}, {TempK: 600, Value: 20, Sigma: 0.1}}
	p.HeatCapacities = []HeatCapacitySet{
		{Grid: mesh.GridSpec{Mesh: [3]int{4, 4, 4}}, Basis: PerMolAtoms, Points: pts},
		{Grid: mesh.GridSpec{Mesh: [3]int{3, 4, 5}, Shifted: true}, Basis: PerKg, Points: pts[1:]},
	}
	return p
}

// TestDerivativesAgainstFiniteDifferences: the analytic derivative of
// every datum (frequencies along the zone and at Γ, sound velocities,
// elastic constants, heat capacities on two grids and bases) with respect
// to every parameter kind agrees with a central difference, step 1e-5 of
// the parameter (truncation about 1e-10 relative), to 1e-6 of the
// derivative (floors: 1e-9 of the datum's largest derivative, and the
// difference's own rounding, 8ε of the values over 2h, for derivatives
// that vanish or are small against the value).
func TestDerivativesAgainstFiniteDifferences(t *testing.T) {
	p := fixtureProblem(t)
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
	kinds := map[string]bool{}
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
			if ep.branch[i] != e0.branch[i] || em.branch[i] != e0.branch[i] {
				t.Fatalf("%s: the branch of %s moved", params[j].name, r.field)
			}
			a := e0.jac[i*np+j]
			fd := (ep.value[i] - em.value[i]) / (2 * h)
			rowMax := 0.0
			for k := 0; k < np; k++ {
				rowMax = math.Max(rowMax, math.Abs(e0.jac[i*np+k]))
			}
			// Rounding of the difference: a few ε of the values over 2h.
			noise := 8 * 0x1p-52 * math.Max(math.Abs(ep.value[i]), math.Abs(em.value[i])) / (2 * h)
			if math.Abs(a-fd) > 1e-6*math.Abs(a)+1e-9*rowMax+noise {
				t.Errorf("∂%s/∂%s: analytic %.10g, central difference %.10g (relative %.2g)", r.field, params[j].name, a, fd, relErr(a, fd))
			}
			kinds[fmt.Sprintf("%s %s", kindOf(r.field), params[j].members[0].path.kind.collection+"."+params[j].members[0].path.kind.field)] = true
		}
	}
	if len(kinds) != 5*4+5 { // data kinds × (spring k_long, k_trans, shell k_long, k_trans) + blocks' phi
		t.Errorf("covered %d (data kind, parameter kind) pairs, want 25: %v", len(kinds), kinds)
	}
}

// kindOf is the data kind of a row's field path.
func kindOf(field string) string {
	for i, c := range field {
		if c == '[' {
			return field[:i]
		}
	}
	return field
}

// simpleCubic is a simple cubic crystal (a = 3 Å, 40 amu) with its three
// nearest-neighbour bonds as explicit springs and a zero explicit block on
// the x bond: along Γ–X its two transverse modes are degenerate.
func simpleCubic() *physics.Crystal {
	return &physics.Crystal{
		Lattice: [][3]float64{{3, 0, 0}, {0, 3, 0}, {0, 0, 3}},
		Sites:   []physics.Site{{Label: "A", MassAmu: 40, Frac: []float64{0, 0, 0}}},
		Springs: []physics.Spring{
			{From: 0, To: 0, Cell: []int{1, 0, 0}, KLong: 3, KTrans: 0.5},
			{From: 0, To: 0, Cell: []int{0, 1, 0}, KLong: 3, KTrans: 0.5},
			{From: 0, To: 0, Cell: []int{0, 0, 1}, KLong: 3, KTrans: 0.5},
		},
		Blocks: []physics.Block{{From: 0, To: 0, Cell: []int{1, 0, 0}, Phi: make([]float64, 9)}},
	}
}

// TestDegenerateDerivatives: along Γ–X of the simple cubic crystal the two
// transverse modes are degenerate. A parameter that keeps the degeneracy
// (the x bond's k_trans, which moves both alike) has the same derivative
// both ways, so its central difference matches; one that splits it (the
// yy element of a block on the x bond) moves the lower branch and leaves
// the upper, and the analytic derivatives (eigenvalues of E_gᴴ ∂D E_g,
// first-order degenerate perturbation theory) match the one-sided
// forward difference of the sorted frequencies (Richardson-extrapolated:
// 2D(h/2) − D(h), error O(h²)).
func TestDegenerateDerivatives(t *testing.T) {
	ctx := testmodels.Ctx(t)
	c := simpleCubic()
	q := [3]float64{0.2, 0, 0}
	nu := compile(t, c).FrequenciesTHz(q)
	if math.Abs(nu[0]-nu[1]) > 1e-12 || nu[2]-nu[1] < 0.1 {
		t.Fatalf("frequencies at %v: %v; want two degenerate transverse below the longitudinal", q, nu)
	}
	p := &Problem{Crystal: c, Free: free("springs[0].k_trans", "blocks[0].phi[4]"),
		Frequencies: []Frequency{{Q: q, FreqTHz: nu[0], SigmaTHz: 0.01, Branch: 1}, {Q: q, FreqTHz: nu[1], SigmaTHz: 0.01, Branch: 2}}}
	var vs physics.Violations
	params := p.params(&vs)
	ev, err := newEvaluator(ctx, p, params)
	if err != nil {
		t.Fatal(err)
	}
	x0 := startVector(params)
	e0, err := ev.eval(ctx, x0)
	if err != nil {
		t.Fatal(err)
	}
	value := func(x []float64, row int) float64 {
		e, err := ev.eval(ctx, x)
		if err != nil {
			t.Fatal(err)
		}
		return e.value[row]
	}
	at := func(j int, h float64) []float64 {
		x := append([]float64(nil), x0...)
		x[j] += h
		return x
	}
	const h = 1e-4
	for row := 0; row < 2; row++ {
		// The degeneracy kept: central difference.
		a := e0.jac[row*2+0]
		fd := (value(at(0, h), row) - value(at(0, -h), row)) / (2 * h)
		if relErr(a, fd) > 1e-6 {
			t.Errorf("branch %d, k_trans (degeneracy kept): analytic %v, central %v", row+1, a, fd)
		}
		// The degeneracy split: one-sided.
		a = e0.jac[row*2+1]
		d1 := (value(at(1, h), row) - nu[row]) / h
		d2 := (value(at(1, h/2), row) - nu[row]) / (h / 2)
		fwd := 2*d2 - d1
		if math.Abs(a-fwd) > 1e-6*math.Max(math.Abs(a), math.Abs(e0.jac[1])) {
			t.Errorf("branch %d, block yy (degeneracy split): analytic %v, forward %v", row+1, a, fwd)
		}
	}
	if e0.jac[1] >= 0 || math.Abs(e0.jac[3]) > 1e-9*math.Abs(e0.jac[1]) {
		t.Errorf("split derivatives %v (lower), %v (upper); want the lower branch to fall and the upper to stay (0 to rounding)", e0.jac[1], e0.jac[3])
	}
}
