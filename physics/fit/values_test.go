package fit

import (
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/thermo"
)

// evalOnce evaluates p at its starting parameters.
func evalOnce(t testing.TB, p *Problem) (*evaluator, *evaluation) {
	t.Helper()
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
	e, err := ev.eval(ctx, startVector(params))
	if err != nil {
		t.Fatal(err)
	}
	return ev, e
}

// TestVelocitiesMatchSoundVelocities: the fit's speeds of sound (the
// relaxed long-wave tensor from the exported forms, internal relaxation by
// an eigendecomposition) equal the core's SoundVelocities (its own routes:
// least squares for springs, the dense route for blocks) to 1e-10.
func TestVelocitiesMatchSoundVelocities(t *testing.T) {
	ctx := testmodels.Ctx(t)
	for _, c := range []*physics.Crystal{fixture(), testmodels.Load(t, "rocksalt-like"), testmodels.Load(t, "diatomic-chain"), testmodels.Load(t, "square-net")} {
		m := compile(t, c)
		dirs := [][3]float64{{1, 0, 0}, {1, 1, 0}, {0.3, -0.7, 0.2}, {1, 2, 3}}
		p := &Problem{Crystal: c, Free: free(firstParam(c))}
		for _, d := range dirs {
			for b := 1; b <= m.Polarizations(); b++ {
				p.SoundVelocities = append(p.SoundVelocities, Velocity{Dir: d, KmS: 1, SigmaKmS: 1, Branch: b})
			}
		}
		_, e := evalOnce(t, p)
		for i, v := range p.SoundVelocities {
			want, err := m.SoundVelocities(ctx, v.Dir)
			if err != nil || want == nil {
				t.Fatalf("%s: SoundVelocities(%v): %v %v", c.Name, v.Dir, want, err)
			}
			if got := e.value[i]; relErr(got, want[v.Branch-1]) > 1e-10 {
				t.Errorf("%s along %v, branch %d: %v km/s, SoundVelocities %v", c.Name, v.Dir, v.Branch, got, want[v.Branch-1])
			}
		}
	}
}

// firstParam is a free parameter of c (any, for evaluations that only
// need values).
func firstParam(c *physics.Crystal) string {
	switch {
	case len(c.Springs) > 0:
		return "springs[0].k_long"
	case len(c.Shells) > 0:
		return "shells[0].k_long"
	}
	return "blocks[0].phi[0]"
}

// gpaPerAmuPerA3KmS2 is ρv² in GPa for ρ = 1 amu/Å³ and v = 1 km/s:
// m_u · 1e30 m⁻³ · 1e6 m²/s² / 1e9 (CODATA 2018).
const gpaPerAmuPerA3KmS2 = physics.AtomicMassKg * 1e30 * 1e6 / 1e9

// TestElasticConstantsCubic: for the rock-salt-like example (cubic, axes
// along the cube edges) the fitted-model elastic constants have cubic
// form (C11 = C22 = C33, C12 = C13 = C23, C44 = C55 = C66, the others 0)
// and give the sound velocities of the core along [100] and [110] by the
// cubic Christoffel solutions (C. Kittel, Introduction to Solid State
// Physics, 8th ed., ch. 3): ρv_L² = C11, ρv_T² = C44 along [100]; ρv_L² =
// (C11 + C12 + 2C44)/2, ρv_T² = C44 and (C11 − C12)/2 along [110].
func TestElasticConstantsCubic(t *testing.T) {
	ctx := testmodels.Ctx(t)
	c := testmodels.Load(t, "rocksalt-like")
	m := compile(t, c)
	p := &Problem{Crystal: c, Free: free("shells[0].k_long")}
	for i := 1; i <= 6; i++ {
		for j := i; j <= 6; j++ {
			p.ElasticConstants = append(p.ElasticConstants, ElasticConstant{I: i, J: j, GPa: 1, SigmaGPa: 1})
		}
	}
	_, e := evalOnce(t, p)
	C := func(i, j int) float64 { return e.value[voigtIndex(i-1, j-1)] }
	c11, c12, c44 := C(1, 1), C(1, 2), C(4, 4)
	scale := c11
	for i := 1; i <= 6; i++ {
		for j := i; j <= 6; j++ {
			want := 0.0
			switch {
			case i == j && i <= 3:
				want = c11
			case i <= 3 && j <= 3:
				want = c12
			case i == j:
				want = c44
			}
			if math.Abs(C(i, j)-want) > 1e-10*scale {
				t.Errorf("C%d%d = %v GPa; cubic form wants %v", i, j, C(i, j), want)
			}
		}
	}
	lat := m.Lattice()
	var mass float64
	for i := 0; i < m.Sites(); i++ {
		mass += m.MassAmu(i)
	}
	rho := mass / lattice3Volume(lat) * gpaPerAmuPerA3KmS2
	for _, tc := range []struct {
		dir  [3]float64
		want []float64 // ρv², ascending
	}{
		{[3]float64{1, 0, 0}, []float64{c44, c44, c11}},
		{[3]float64{1, 1, 0}, sorted3((c11-c12)/2, c44, (c11+c12+2*c44)/2)},
	} {
		v, err := m.SoundVelocities(ctx, tc.dir)
		if err != nil {
			t.Fatal(err)
		}
		for s := range v {
			if got := rho * v[s] * v[s]; relErr(got, tc.want[s]) > 1e-9 {
				t.Errorf("along %v, branch %d: ρv² = %v GPa, from the C_IJ %v", tc.dir, s+1, got, tc.want[s])
			}
		}
	}
}

func sorted3(a, b, c float64) []float64 {
	s := []float64{a, b, c}
	for i := range s {
		for j := i + 1; j < len(s); j++ {
			if s[j] < s[i] {
				s[i], s[j] = s[j], s[i]
			}
		}
	}
	return s
}

func lattice3Volume(l [3][3]float64) float64 {
	return math.Abs(l[0][0]*(l[1][1]*l[2][2]-l[1][2]*l[2][1]) - l[0][1]*(l[1][0]*l[2][2]-l[1][2]*l[2][0]) + l[0][2]*(l[1][0]*l[2][1]-l[1][1]*l[2][0]))
}

// TestElasticConstantsSimpleCubic: nearest-neighbour springs k∥, k⊥ on a
// simple cubic lattice of constant a give, for small q, ρω² = (k∥q_x² +
// k⊥(q_y² + q_z²))/a·(…) on the x polarization and no xy coupling
// (derived: D_xx = (2/m)[k∥(1 − cos q_x a) + k⊥(2 − cos q_y a − cos q_z
// a)], D_xy = 0); the cubic Christoffel matrix (Γ_xx = C11 u_x² + C44(u_y²
// + u_z²), Γ_xy = (C12 + C44)u_x u_y) then reads C11 = k∥/a, C44 = k⊥/a,
// C12 = −k⊥/a.
func TestElasticConstantsSimpleCubic(t *testing.T) {
	c := simpleCubic()
	c.Blocks = nil
	const a, kl, kt = 3.0, 3.0, 0.5
	p := &Problem{Crystal: c, Free: free("springs[0].k_long"), ElasticConstants: []ElasticConstant{
		{I: 1, J: 1, GPa: 1, SigmaGPa: 1}, {I: 4, J: 4, GPa: 1, SigmaGPa: 1}, {I: 1, J: 2, GPa: 1, SigmaGPa: 1}, {I: 2, J: 3, GPa: 1, SigmaGPa: 1}}}
	_, e := evalOnce(t, p)
	want := []float64{kl / a, kt / a, -kt / a, -kt / a}
	for i, w := range want {
		if got := e.value[i] / gpaPerEVPerA3; relErr(got, w) > 1e-12 {
			t.Errorf("C%d%d = %v eV/Å³, want %v", p.ElasticConstants[i].I, p.ElasticConstants[i].J, got, w)
		}
	}
}

// TestChristoffelMapRank: the Christoffel map of a fully symmetric
// elastic tensor has rank 21, so its pseudo-inverse recovers every
// constant; checked on a triclinic tensor of invented constants.
func TestChristoffelMapRank(t *testing.T) {
	a := christoffelMap()
	var c [21]float64
	for k := range c {
		c[k] = float64(1 + (k*7)%11)
	}
	var g [81]float64 // G[(α,a),(β,c)] with C(u) = Σ u_α u_β G_αβ = Γ(u)
	for ac := 0; ac < 9; ac++ {
		for ab := 0; ab < 9; ab++ {
			var s float64
			for k := range c {
				s += a.At(ac*9+ab, k) * c[k]
			}
			i, k, al, be := ac/3, ac%3, ab/3, ab%3
			g[(al*3+i)*9+be*3+k] = s
		}
	}
	got := voigtFromG(g[:])
	for k := range c {
		if relErr(got[k], c[k]) > 1e-12 {
			t.Errorf("constant %d: recovered %v, want %v", k, got[k], c[k])
		}
	}
}

// TestHeatCapacityMatchesThermo: the fit's heat capacities (a direct mode
// sum over the whole grid, time-reversal pairs once) equal thermo's mode
// sum (symmetry-reduced grid, series evaluation) to 1e-10, on every
// basis, on a Γ-centred and a shifted grid.
func TestHeatCapacityMatchesThermo(t *testing.T) {
	ctx := testmodels.Ctx(t)
	temps := []float64{5, 40, 150, 600}
	for _, c := range []*physics.Crystal{fixture(), testmodels.Load(t, "rocksalt-like"), testmodels.Load(t, "diatomic-chain")} {
		m := compile(t, c)
		for _, spec := range []mesh.GridSpec{{Mesh: [3]int{6, 6, 6}}, {Mesh: [3]int{5, 4, 6}, Shifted: true}} {
			if m.Dim() == 1 {
				spec.Mesh = [3]int{40, 1, 1}
			}
			g, err := m.GridModes(ctx, spec, physics.GridOptions{})
			if err != nil {
				t.Fatal(err)
			}
			th, err := thermo.ComputeThermal(ctx, m, g, thermo.ThermalOptions{TempsK: temps})
			if err != nil {
				t.Fatal(err)
			}
			var mass float64
			for i := 0; i < m.Sites(); i++ {
				mass += m.MassAmu(i)
			}
			for _, basis := range []HeatBasis{PerMolAtoms, PerMolCells, PerKg} {
				var pts []HeatCapacity
				for _, tk := range temps {
					pts = append(pts, HeatCapacity{TempK: tk, Value: 1, Sigma: 1})
				}
				p := &Problem{Crystal: c, Free: free(firstParam(c)), HeatCapacities: []HeatCapacitySet{{Grid: spec, Basis: basis, Points: pts}}}
				_, e := evalOnce(t, p)
				for k, tp := range th.Points {
					want := tp.CveVPerK * basisPerEVPerK(basis, m.Sites(), mass)
					if relErr(e.value[k], want) > 1e-10 {
						t.Errorf("%s %v %v at %v K: %v, thermo %v", c.Name, spec, basis, tp.TempK, e.value[k], want)
					}
				}
			}
		}
	}
}

// TestHeatCapacityOnlyRecoversScale: heat capacities alone of the
// monatomic chain (one spring: the frequency scale) give back its spring
// constant to 1e-8 from a start half of it.
func TestHeatCapacityOnlyRecoversScale(t *testing.T) {
	truth := testmodels.Chain() // K = 1.5 eV/Å²
	m := compile(t, truth)
	spec := mesh.GridSpec{Mesh: [3]int{64, 1, 1}}
	g, err := m.GridModes(testmodels.Ctx(t), spec, physics.GridOptions{})
	if err != nil {
		t.Fatal(err)
	}
	temps := []float64{10, 20, 40, 80, 160, 320}
	th, err := thermo.ComputeThermal(testmodels.Ctx(t), m, g, thermo.ThermalOptions{TempsK: temps})
	if err != nil {
		t.Fatal(err)
	}
	var pts []HeatCapacity
	for _, tp := range th.Points {
		v := physics.EVPerKToJPerMolK(tp.CveVPerK) // one site: per mole of atoms = per mole of cells
		pts = append(pts, HeatCapacity{TempK: tp.TempK, Value: v, Sigma: 0.01 * v})
	}
	start := testmodels.Chain()
	start.Springs[0].KLong = 0.75
	res := fitOK(t, &Problem{Crystal: start, Free: free("springs[0].k_long"),
		HeatCapacities: []HeatCapacitySet{{Grid: spec, Basis: PerMolAtoms, Points: pts}}})
	if e := relErr(res.Params[0].Value, 1.5); e > 1e-8 {
		t.Errorf("k = %.12g from heat capacities, want 1.5 (relative error %.2g); %s", res.Params[0].Value, e, res.Stop)
	}
}
