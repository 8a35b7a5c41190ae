// Tests of the polar data the core compiles (Born charges, ε∞), the
// charge-neutrality sum rule, and the long-range hook, with a stand-in
// term (the dipole–dipole term itself is physics/polar's, tested there).

package physics_test

import (
	"context"
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// constTerm is a stand-in long-range term: a constant real symmetric
// matrix added at every q (no non-analytic part), enough to see the hook
// at work where D(q) is assembled.
type constTerm struct {
	n int
	v float64
}

func (c constTerm) AddTo(_, _ [3]float64, a []complex128, _ func() bool) bool {
	for r := 0; r < c.n; r++ {
		a[r*c.n+r] += complex(c.v, 0)
	}
	return true
}
func (c constTerm) AddGradTo([3]float64, *[3][]complex128, func() bool) bool { return true }
func (c constTerm) Scale() float64                                           { return c.v }
func (c constTerm) Terms() int                                               { return 1 }
func (c constTerm) FlopsPerQ() float64                                       { return 0 }
func (c constTerm) Method() string                                           { return "constant" }

// constBuilder builds a constTerm of value v.
func constBuilder(v float64) physics.LongRangeBuilder {
	return func(_ context.Context, m *physics.Model) (physics.LongRange, error) {
		return constTerm{n: m.ModeCount(), v: v}, nil
	}
}

// polarPair is the rock-salt-like example with charges za, zb (isotropic)
// and ε∞ = eps·1.
func polarPair(t *testing.T, za, zb, eps float64) *physics.Crystal {
	c := testmodels.Load(t, "rocksalt-like")
	c.Sites[0].BornCharge = []float64{za, 0, 0, 0, za, 0, 0, 0, za}
	c.Sites[1].BornCharge = []float64{zb, 0, 0, 0, zb, 0, 0, 0, zb}
	c.EpsilonInf = []float64{eps, 0, 0, 0, eps, 0, 0, 0, eps}
	return c
}

// TestPolarValidation: every violation of the polar data is reported at
// once, each at its field path.
func TestPolarValidation(t *testing.T) {
	cases := []struct {
		name   string
		edit   func(c *physics.Crystal)
		fields []string
	}{
		{"one site uncharged", func(c *physics.Crystal) { c.Sites[1].BornCharge = nil }, []string{"sites[1].born_charge"}},
		{"eight numbers and a NaN", func(c *physics.Crystal) {
			c.Sites[0].BornCharge = []float64{1, 0, 0, 0, 1, 0, 0, 0}
			c.Sites[1].BornCharge[4] = math.NaN()
		}, []string{"sites[0].born_charge", "sites[1].born_charge[4]"}},
		{"charge too large", func(c *physics.Crystal) { c.Sites[0].BornCharge[0] = 1e3 }, []string{"sites[0].born_charge[0]"}},
		{"no ε∞", func(c *physics.Crystal) { c.EpsilonInf = nil }, []string{"epsilon_inf"}},
		{"ε∞ without charges", func(c *physics.Crystal) { c.Sites[0].BornCharge, c.Sites[1].BornCharge = nil, nil }, []string{"sites[0].born_charge", "sites[1].born_charge", "epsilon_inf"}},
		{"ε∞ of 4 numbers", func(c *physics.Crystal) { c.EpsilonInf = []float64{1, 0, 0, 1} }, []string{"epsilon_inf"}},
		// Found by fuzzing: the length went unchecked when no site had a
		// charge, and the symmetry check read past the end (a panic).
		{"ε∞ of 6 numbers without charges", func(c *physics.Crystal) {
			c.Sites[0].BornCharge, c.Sites[1].BornCharge = nil, nil
			c.EpsilonInf = []float64{1, 0, 0, 0, 1, 0}
		}, []string{"sites[0].born_charge", "sites[1].born_charge", "epsilon_inf", "epsilon_inf"}},
		{"ε∞ infinite", func(c *physics.Crystal) { c.EpsilonInf[8] = math.Inf(1) }, []string{"epsilon_inf[8]"}},
		{"ε∞ not symmetric", func(c *physics.Crystal) { c.EpsilonInf[1] = 0.5 }, []string{"epsilon_inf"}},
		{"ε∞ not positive definite", func(c *physics.Crystal) { c.EpsilonInf[4] = -2 }, []string{"epsilon_inf"}},
		// Found by fuzzing: elements near 1e-153 once made a library
		// eigensolver panic.
		{"ε∞ of subnormal scale", func(c *physics.Crystal) {
			for k := range c.EpsilonInf {
				c.EpsilonInf[k] = 1.2e-153
			}
			c.EpsilonInf[8] = 1.4e-76
		}, []string{"epsilon_inf"}},
		{"ε∞ below 1", func(c *physics.Crystal) { c.EpsilonInf = []float64{2, 1.5, 0, 1.5, 2, 0, 0, 0, 2} }, []string{"epsilon_inf"}},
		{"two dimensions", func(c *physics.Crystal) {
			c.Lattice = c.Lattice[:2]
			c.Shells = nil
			for i := range c.Sites {
				c.Sites[i].Frac = c.Sites[i].Frac[:2]
			}
		}, []string{"epsilon_inf"}},
		{"two polarizations", func(c *physics.Crystal) { c.Polarizations = 2 }, []string{"epsilon_inf"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c := polarPair(t, 1, -1, 3)
			tc.edit(c)
			err := physics.Validate(c, physics.Limits{})
			var ve *physics.ValidationError
			if !errors.As(err, &ve) {
				t.Fatalf("Validate: %v; want a *ValidationError", err)
			}
			var got []string
			for _, v := range ve.Violations {
				got = append(got, v.Field)
			}
			if strings.Join(got, ",") != strings.Join(tc.fields, ",") {
				t.Errorf("fields %v; want %v (%v)", got, tc.fields, err)
			}
		})
	}
}

// TestPolarNeedsBuilder: a crystal with charges does not compile without
// a long-range builder (its frequencies would miss the dipole term).
func TestPolarNeedsBuilder(t *testing.T) {
	_, err := physics.Compile(context.Background(), polarPair(t, 1, -1, 3), physics.Options{})
	if !errors.Is(err, physics.ErrNoLongRangeBuilder) {
		t.Fatalf("Compile without a builder: %v; want ErrNoLongRangeBuilder", err)
	}
}

// TestHashesOfExamplesUnchanged: models without polar data hash as before
// polar data existed, with or without the new options. The hashes were
// computed on the code before the polar fields were added.
func TestHashesOfExamplesUnchanged(t *testing.T) {
	want := map[string]string{
		"chain":          "31e47a787ab622652d7b0140157fea405fc30443c07fa7995f2fbcb4ae01cfe4",
		"diatomic-chain": "3f9ba0a93076197652620c4962a1c3aa30bf79fd6324630d6dfe2f3f6b4a851f",
		"fcc":            "32b85c65bc3194fa8c31543d426e93209d4e1571ae950345ff51426103efbedd",
		"rocksalt-like":  "79137d3c87d06c9361669f0c590c45b966b8f6799262f398bd4a2f9b6bb1e53e",
		"square-net":     "a75b0da5dd31b30ffef31daa993a1edaef6b2f332c917fb44282f5e0abbcbbc9",
	}
	for name, h := range want {
		for _, opt := range []physics.Options{{}, {EnforceChargeNeutrality: true, LongRange: constBuilder(1)}} {
			m, err := physics.Compile(context.Background(), testmodels.Load(t, name), opt)
			if err != nil {
				t.Fatal(err)
			}
			if m.Hash() != h {
				t.Errorf("%s (%+v): hash %s; want %s as before", name, opt.EnforceChargeNeutrality, m.Hash(), h)
			}
			if m.Polar() || m.LongRangeTerm() != nil {
				t.Errorf("%s: a model without charges has polar data", name)
			}
		}
	}
}

// TestNoPolarDataBitIdentical: without charges the options of polar
// models change no result, bit for bit: frequencies on a grid and at
// single points.
func TestNoPolarDataBitIdentical(t *testing.T) {
	for _, name := range testmodels.Names(t) {
		c := testmodels.Load(t, name)
		a := testmodels.Compile(t, c)
		b, err := physics.Compile(context.Background(), c, physics.Options{EnforceChargeNeutrality: true, LongRange: constBuilder(7)})
		if err != nil {
			t.Fatal(err)
		}
		var spec mesh.GridSpec
		for k := 0; k < a.Dim(); k++ {
			spec.Mesh[k] = 4
		}
		ga, err := a.GridModes(context.Background(), spec, physics.GridOptions{})
		if err != nil {
			t.Fatal(err)
		}
		gb, err := b.GridModes(context.Background(), spec, physics.GridOptions{})
		if err != nil {
			t.Fatal(err)
		}
		for i := range ga.FreqTHz {
			if math.Float64bits(ga.FreqTHz[i]) != math.Float64bits(gb.FreqTHz[i]) {
				t.Fatalf("%s: grid frequency %d: %v and %v", name, i, ga.FreqTHz[i], gb.FreqTHz[i])
			}
		}
	}
}

// TestChargeNeutrality: the violation is measured as given; enforcing it
// subtracts the mean charge (the least-squares correction), which leaves
// charges that already sum to zero, and their hash, as they were.
func TestChargeNeutrality(t *testing.T) {
	compile := func(c *physics.Crystal, enforce bool) *physics.Model {
		m, err := physics.Compile(context.Background(), c, physics.Options{EnforceChargeNeutrality: enforce, LongRange: constBuilder(0)})
		if err != nil {
			t.Fatal(err)
		}
		return m
	}
	bad := polarPair(t, 1.2, -1.0, 3)
	m := compile(bad, false)
	if v := m.ChargeNeutralityViolation(); math.Abs(v-0.2) > 1e-15 {
		t.Errorf("violation %v e; want 0.2 (1.2 − 1.0)", v)
	}
	e := compile(bad, true)
	z := e.BornCharges()
	// Mean of the diagonal (1.2 − 1.0)/2 = 0.1 subtracted from each site.
	if math.Abs(z[0][0]-1.1) > 1e-15 || math.Abs(z[1][0]+1.1) > 1e-15 || z[0][1] != 0 {
		t.Errorf("enforced charges %v, %v; want ±1.1 on the diagonal", z[0], z[1])
	}
	if !e.ChargeNeutralityEnforced() || e.ChargeNeutralityViolation() != m.ChargeNeutralityViolation() {
		t.Errorf("enforced model reports enforced=%v, violation %v", e.ChargeNeutralityEnforced(), e.ChargeNeutralityViolation())
	}
	if e.Hash() == m.Hash() {
		t.Error("enforcing a violated sum rule left the hash unchanged")
	}
	good := polarPair(t, 1.1, -1.1, 3)
	if compile(good, true).Hash() != compile(good, false).Hash() {
		t.Error("enforcing a sum rule that holds changed the hash")
	}
	if compile(good, false).Hash() == compile(polarPair(t, 1.1, -1.1, 3.5), false).Hash() {
		t.Error("a different ε∞ hashed alike")
	}
}

// TestLongRangeHook: the term is added wherever D(q) is assembled —
// single points, ModesToward, grids, streams — and widens the eigenvalue
// tolerance by its rounding.
func TestLongRangeHook(t *testing.T) {
	c := polarPair(t, 1, -1, 3)
	plain := testmodels.Compile(t, testmodels.Load(t, "rocksalt-like"))
	const v = 0.5 // eV/Å²/amu on the diagonal: every λ shifts by v
	m, err := physics.Compile(context.Background(), c, physics.Options{LongRange: constBuilder(v)})
	if err != nil {
		t.Fatal(err)
	}
	q := [3]float64{0.1, 0.2, 0.3}
	shifted := func(f []float64) []float64 {
		out := make([]float64, len(f))
		for k, x := range f {
			l := x / physics.NuUnitTHz
			out[k] = math.Sqrt(l*l+v) * physics.NuUnitTHz
		}
		return out
	}
	want := shifted(plain.FrequenciesTHz(q))
	got := m.FrequenciesTHz(q)
	along, _ := m.ModesToward(q, [3]float64{1, 0, 0})
	for k := range want {
		if math.Abs(got[k]-want[k]) > 1e-12*want[len(want)-1] || math.Abs(along[k]-got[k]) > 1e-12*want[len(want)-1] {
			t.Errorf("branch %d: %v THz (toward: %v); want %v", k, got[k], along[k], want[k])
		}
	}
	if m.EigenTol() <= plain.EigenTol() {
		t.Errorf("EigenTol %v not widened by the term (plain %v)", m.EigenTol(), plain.EigenTol())
	}
	var got2 []float64
	err = m.StreamModes(context.Background(), []mesh.QPoint{{Q: q, Weight: 1}}, physics.ModeOptions{GammaDirs: [][3]float64{{1, 0, 0}}}, func(c physics.ModeChunk) error {
		got2 = c.Points[0].FreqTHz
		return nil
	})
	if err != nil || got2[0] != got[0] {
		t.Errorf("stream: %v, %v; want %v", got2, err, got)
	}
	err = m.StreamModes(context.Background(), []mesh.QPoint{{Q: q}}, physics.ModeOptions{GammaDirs: [][3]float64{{math.NaN()}, {}}}, func(physics.ModeChunk) error { return nil })
	var ve *physics.ValidationError
	if !errors.As(err, &ve) || len(ve.Violations) != 2 {
		t.Errorf("two bad gamma_dirs: %v; want 2 violations (count, finite)", err)
	}
}

// TestSymmetrizePolar: Symmetrize averages Born charges and ε∞ over the
// group; a charge and ε∞ broken within the symmetry tolerance come back
// isotropic on the cubic rock-salt-like crystal.
func TestSymmetrizePolar(t *testing.T) {
	c := polarPair(t, 1.1, -1.1, 3)
	c.Sites[0].BornCharge[1] = 1e-9
	c.EpsilonInf[8] = 3 + 1e-9
	out, n, err := physics.Symmetrize(context.Background(), c, physics.Options{LongRange: constBuilder(0)})
	if err != nil {
		t.Fatal(err)
	}
	if n != 48 {
		t.Fatalf("%d operations; want 48 (m3̄m)", n)
	}
	z := out.Sites[0].BornCharge
	if math.Abs(z[1]) > 1e-15 || math.Abs(z[0]-z[4]) > 1e-15 || math.Abs(z[0]-1.1) > 1e-12 {
		t.Errorf("symmetrised Z of site 0: %v", z)
	}
	e := out.EpsilonInf
	if math.Abs(e[0]-e[8]) > 1e-15 || math.Abs(e[0]-(3+1e-9/3)) > 1e-14 {
		t.Errorf("symmetrised ε∞: %v; want (3 + 1e-9/3)·1", e)
	}
}
