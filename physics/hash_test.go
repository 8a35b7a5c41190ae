// Tests of the canonical model hash.

package physics_test

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"regexp"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"

	"github.com/materials-lab/modegrid/physics/lattice"
)

// decodeModel decodes a model file text the way loadExample does.
func decodeModel(t *testing.T, text string) *physics.Crystal {
	return testmodels.Decode(t, "inline", []byte(text))
}

// TestHashFormat: 64 lower-case hex digits, stable across compiles.
func TestHashFormat(t *testing.T) {
	for _, name := range testmodels.Names(t) {
		a := testmodels.Compile(t, testmodels.Load(t, name)).Hash()
		b := testmodels.Compile(t, testmodels.Load(t, name)).Hash()
		if !regexp.MustCompile(`^[0-9a-f]{64}$`).MatchString(a) || a != b {
			t.Errorf("%s: hash %q, again %q", name, a, b)
		}
	}
}

// TestHashInvariances: descriptions of the same physics hash alike.
func TestHashInvariances(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 4))
	fcc := testmodels.Load(t, "fcc")
	chain := twoSiteChain()
	cases := []struct {
		name string
		a, b *physics.Crystal
	}{
		{"name", fcc, func() *physics.Crystal { c := testmodels.Clone(fcc); c.Name = "other"; return c }()},
		// The example constants convert from N/m back to the same
		// float64 (TestHashUnitConversion covers ones that do not).
		{"N/m vs eV/Å² (fcc)", fcc, testmodels.InNPerM(fcc)},
		{"N/m vs eV/Å² (blocks and springs)", chain, testmodels.InNPerM(chain)},
		{"spring order", chain, func() *physics.Crystal {
			c := testmodels.Clone(chain)
			c.Springs[0], c.Springs[1] = c.Springs[1], c.Springs[0]
			return c
		}()},
		{"bond given as its reverse", chain, func() *physics.Crystal {
			c := testmodels.Clone(chain)
			c.Springs[1] = physics.Spring{From: 0, To: 1, Cell: []int{-1}, KLong: 1}
			return c
		}()},
		{"block given as its transpose", chain, func() *physics.Crystal {
			c := testmodels.Clone(chain)
			c.Blocks[0].Cell[0] = -1 // Φ(0; −1) = Φ(0; 1)ᵀ, symmetric here
			return c
		}()},
		{"zero spring added", chain, func() *physics.Crystal {
			c := testmodels.Clone(chain)
			c.Springs = append(c.Springs, physics.Spring{From: 0, To: 0, Cell: []int{3}})
			return c
		}()},
		{"transverse spring with p = 1", chain, func() *physics.Crystal {
			c := testmodels.Clone(chain)
			c.Springs[0].KTrans = 5 // moves y, z only: not in a p = 1 model
			return c
		}()},
		{"shell order", testmodels.Load(t, "rocksalt-like"), func() *physics.Crystal {
			c := testmodels.Load(t, "rocksalt-like")
			rng.Shuffle(len(c.Shells), func(i, j int) { c.Shells[i], c.Shells[j] = c.Shells[j], c.Shells[i] })
			return c
		}()},
		{"shell vs explicit springs", fcc, func() *physics.Crystal {
			c := testmodels.Clone(fcc)
			c.Shells = nil
			m := testmodels.Compile(t, fcc)
			bonds, _ := m.ShellBonds(context.Background(), fcc.Shells[0])
			for _, b := range bonds {
				c.Springs = append(c.Springs, physics.Spring{From: b.From, To: b.To, Cell: b.N[:], KLong: fcc.Shells[0].KLong})
			}
			rng.Shuffle(len(c.Springs), func(i, j int) { c.Springs[i], c.Springs[j] = c.Springs[j], c.Springs[i] })
			return c
		}()},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			ha, hb := testmodels.Compile(t, tc.a).Hash(), testmodels.Compile(t, tc.b).Hash()
			if ha != hb {
				t.Errorf("hashes differ: %s vs %s", ha, hb)
			}
		})
	}
	// On-site blocks that satisfy the sum rule exactly: Σ of the
	// off-site blocks of each site is −1 − 1 = −2 (exact in binary).
	atRule := &physics.Crystal{
		Lattice:       [][3]float64{{4, 0, 0}},
		Polarizations: 1,
		Sites:         []physics.Site{{Label: "A", MassAmu: 10, Frac: []float64{0}}, {Label: "B", MassAmu: 20, Frac: []float64{0.5}}},
		Blocks: []physics.Block{
			{From: 0, To: 1, Cell: []int{0}, Phi: []float64{-1, 0, 0, 0, 0, 0, 0, 0, 0}},
			{From: 1, To: 0, Cell: []int{1}, Phi: []float64{-1, 0, 0, 0, 0, 0, 0, 0, 0}},
			{From: 0, To: 0, Cell: []int{0}, Phi: []float64{2, 0, 0, 0, 0, 0, 0, 0, 0}},
			{From: 1, To: 1, Cell: []int{0}, Phi: []float64{2, 0, 0, 0, 0, 0, 0, 0, 0}},
		},
	}
	for name, c := range map[string]*physics.Crystal{"fcc (no on-site block)": fcc, "on-site blocks at the sum rule": atRule} {
		t.Run("enforcing a sum rule with nothing to enforce: "+name, func(t *testing.T) {
			m, err := physics.Compile(context.Background(), c, physics.Options{EnforceSumRule: true})
			if err != nil {
				t.Fatal(err)
			}
			if m.Hash() != testmodels.Compile(t, c).Hash() {
				t.Error("hash changed")
			}
		})
	}
}

// TestHashUnitConversion: a constant given in N/m hashes with its eV/Å²
// twin exactly when the conversion k/16.02176634 (CODATA 2018: 1 eV/Å² =
// 16.02176634 N/m) yields the same float64; when it does not, the engine
// computes with a different number, and the hashes differ.
func TestHashUnitConversion(t *testing.T) {
	var exact, inexact float64
	for k := 1.0; exact == 0 || inexact == 0; k += 0.001 {
		if (k*physics.EVPerA2InNPerM)/physics.EVPerA2InNPerM == k {
			exact = k
		} else {
			inexact = k
		}
	}
	for _, tc := range []struct {
		k    float64
		same bool
	}{{exact, true}, {inexact, false}} {
		ev := twoChain(10, 20)
		ev.Springs[0].KLong = tc.k
		nm := testmodels.Clone(ev)
		nm.ForceUnit = physics.NPerM
		nm.Springs[0].KLong = tc.k * physics.EVPerA2InNPerM
		nm.Springs[1].KLong = physics.EVPerA2InNPerM // converts back to exactly 1
		a, b := testmodels.Compile(t, ev), testmodels.Compile(t, nm)
		if same := a.Hash() == b.Hash(); same != tc.same || sameBits(a, b) != tc.same {
			t.Errorf("k = %v eV/Å² vs %v N/m: same hash %v, same compiled terms %v; want %v", tc.k, nm.Springs[0].KLong, same, sameBits(a, b), tc.same)
		}
	}
}

// TestHashJSONSpelling: key order, spacing and number spelling of the
// model file do not matter (the hash is of the decoded model).
func TestHashJSONSpelling(t *testing.T) {
	a := `{"name":"x","lattice":[{"x":2.5,"y":0,"z":0}],"polarizations":1,
	"sites":[{"label":"A","massAmu":40,"frac":[0]}],
	"springs":[{"fromSite":0,"toSite":0,"cell":[1],"kLong":1.5}]}`
	b := `{ "springs" : [ { "kLong" : 15e-1, "cell" : [ 1 ], "toSite" : 0, "fromSite" : 0 } ],
	  "sites" : [ { "frac" : [ 0.0 ], "massAmu" : 40.000, "label" : "A" } ],
	  "polarizations" : 1, "lattice" : [ { "z" : 0, "y" : 0, "x" : 2.50 } ], "name" : "y" }`
	if !json.Valid([]byte(a)) || !json.Valid([]byte(b)) {
		t.Fatal("test JSON invalid")
	}
	ha := testmodels.Compile(t, decodeModel(t, a)).Hash()
	hb := testmodels.Compile(t, decodeModel(t, b)).Hash()
	if ha != hb {
		t.Errorf("hashes differ: %s vs %s", ha, hb)
	}
}

// TestHashChanges: any change that changes a result changes the hash,
// including a rigid rotation and a site permutation, which leave the
// spectrum alone but rotate eigenvectors and velocities or reorder the
// per-site results (see Model.Hash).
func TestHashChanges(t *testing.T) {
	rs := testmodels.Load(t, "rocksalt-like")
	base := testmodels.Compile(t, rs).Hash()
	rng := rand.New(rand.NewPCG(2, 9))
	cases := []struct {
		name   string
		mutate func(c *physics.Crystal) *physics.Crystal
	}{
		{"mass", func(c *physics.Crystal) *physics.Crystal { c.Sites[1].MassAmu *= 1.001; return c }},
		{"spring constant by 1e-8", func(c *physics.Crystal) *physics.Crystal { c.Shells[0].KLong *= 1 + 1e-8; return c }},
		{"lattice scale", func(c *physics.Crystal) *physics.Crystal {
			for k := range c.Lattice {
				c.Lattice[k] = lattice.Scale(c.Lattice[k], 1.01)
			}
			return c
		}},
		{"label", func(c *physics.Crystal) *physics.Crystal {
			c.Sites[0].Label = "R"
			for k := range c.Shells {
				for _, p := range []*string{&c.Shells[k].FromLabel, &c.Shells[k].ToLabel} {
					if *p == "P" {
						*p = "R"
					}
				}
			}
			return c
		}},
		{"polarizations", func(c *physics.Crystal) *physics.Crystal { c.Polarizations = 2; return c }},
		{"extra shell", func(c *physics.Crystal) *physics.Crystal {
			c.Shells = append(c.Shells, physics.Shell{FromLabel: "P", ToLabel: "Q", Shell: 2, KLong: 0.1})
			return c
		}},
		{"rigid rotation", func(c *physics.Crystal) *physics.Crystal {
			return testmodels.Rotated(c, testmodels.RandomRotation(rng))
		}},
		{"site permutation", func(c *physics.Crystal) *physics.Crystal { return testmodels.PermutedSites(c, []int{1, 0}) }},
		{"site moved by a lattice vector", func(c *physics.Crystal) *physics.Crystal { c.Sites[1].Frac[0] -= 1; return c }},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			if h := testmodels.Compile(t, tc.mutate(testmodels.Clone(rs))).Hash(); h == base {
				t.Error("hash unchanged")
			}
		})
	}
}

// numberRef names one number of a crystal description and points at it.
type numberRef struct {
	name string
	p    *float64
}

// numbersOf lists every real number of c: lattice components, masses,
// fractional positions, spring and shell constants and block elements.
func numbersOf(c *physics.Crystal) []numberRef {
	var out []numberRef
	add := func(p *float64, format string, args ...any) {
		out = append(out, numberRef{fmt.Sprintf(format, args...), p})
	}
	for k := range c.Lattice {
		for a := range c.Lattice[k] {
			add(&c.Lattice[k][a], "lattice[%d][%d]", k, a)
		}
	}
	for i := range c.Sites {
		add(&c.Sites[i].MassAmu, "sites[%d].mass_amu", i)
		for k := range c.Sites[i].Frac {
			add(&c.Sites[i].Frac[k], "sites[%d].frac[%d]", i, k)
		}
	}
	for i := range c.Springs {
		add(&c.Springs[i].KLong, "springs[%d].k_long", i)
		add(&c.Springs[i].KTrans, "springs[%d].k_trans", i)
	}
	for i := range c.Shells {
		add(&c.Shells[i].KLong, "shells[%d].k_long", i)
		add(&c.Shells[i].KTrans, "shells[%d].k_trans", i)
	}
	for i := range c.Blocks {
		for a := range c.Blocks[i].Phi {
			add(&c.Blocks[i].Phi[a], "blocks[%d].phi[%d]", i, a)
		}
	}
	return out
}

// everyKind is a three-dimensional two-site crystal in which every number
// is non-zero and enters the compiled model: a skewed cell, springs with
// both constants, a shell, an off-site and an on-site block.
func everyKind() *physics.Crystal {
	return &physics.Crystal{
		Lattice: [][3]float64{{3.1, 0.2, 0.15}, {0.25, 2.9, 0.1}, {0.12, 0.3, 3.3}},
		Sites: []physics.Site{
			{Label: "A", MassAmu: 12.5, Frac: []float64{0.05, 0.1, 0.15}},
			{Label: "B", MassAmu: 31.25, Frac: []float64{0.55, 0.45, 0.6}},
		},
		Springs: []physics.Spring{
			{From: 0, To: 1, Cell: []int{0, 0, 0}, KLong: 2.5, KTrans: 0.75},
			{From: 1, To: 0, Cell: []int{1, 0, 0}, KLong: 1.5, KTrans: 0.25},
		},
		Shells: []physics.Shell{{FromLabel: "A", ToLabel: "A", Shell: 1, KLong: 0.8, KTrans: 0.3}},
		Blocks: []physics.Block{
			{From: 0, To: 1, Cell: []int{0, 1, 0}, Phi: []float64{-0.11, 0.012, 0.013, 0.021, -0.12, 0.023, 0.031, 0.032, -0.13}},
			{From: 1, To: 1, Cell: []int{0, 0, 0}, Phi: []float64{0.41, 0.042, 0.043, 0.051, 0.42, 0.053, 0.061, 0.062, 0.43}},
		},
	}
}

// TestHashSeesEveryNumber: changing any single number of a model by one
// part in 1e12 changes the hash — every field kind, and a number beside
// values 1e12 times larger of its kind (a hash that kept a fixed number of
// bits relative to the largest value would miss these; the engine does
// not: the force constant or mass enters its own terms unscaled).
func TestHashSeesEveryNumber(t *testing.T) {
	wide := func() []*physics.Crystal {
		masses := twoSiteChain()
		masses.Sites[0].MassAmu, masses.Sites[1].MassAmu = 1e-3, 1e9 // MinMassAmu < 1e-3, 1e9 = MaxMassAmu
		springs := twoSiteChain()
		springs.Springs[0].KLong, springs.Springs[1].KLong = 1e-6, 1e6 // 1e6 = MaxForceEVPerA2
		blocks := twoSiteChain()
		blocks.Blocks = append(blocks.Blocks, physics.Block{From: 0, To: 1, Cell: []int{2}, Phi: []float64{1e6, 0, 0, 0, 0, 0, 0, 0, 0}})
		blocks.Blocks[0].Phi[0] = -1e-6
		lattice := twoSiteChain()
		lattice.Lattice[0] = [3]float64{4, 4e-12, 0}
		return []*physics.Crystal{masses, springs, blocks, lattice}
	}
	models := []struct {
		name string
		c    *physics.Crystal
	}{{"every kind", everyKind()}}
	for i, c := range wide() {
		models = append(models, struct {
			name string
			c    *physics.Crystal
		}{fmt.Sprintf("ratio 1e12 #%d", i), c})
	}
	for _, tc := range models {
		name, c := tc.name, tc.c
		base := testmodels.Compile(t, c).Hash()
		for x := range numbersOf(c) {
			pc := testmodels.Clone(c)
			ref := numbersOf(pc)[x]
			if *ref.p == 0 {
				continue // zero spring constants of the chains: no relative change
			}
			*ref.p *= 1 - 1e-12 // down: 1e9 amu and 1e6 eV/Å² are the largest accepted
			if h := testmodels.Compile(t, pc).Hash(); h == base {
				t.Errorf("%s: %s × (1 − 1e-12): hash unchanged", name, ref.name)
			}
		}
	}
}

// twoChain is a diatomic chain (a = 4 Å, p = 1) of masses m1, m2 amu with
// nearest-neighbour springs of 1 eV/Å².
func twoChain(m1, m2 float64) *physics.Crystal {
	return &physics.Crystal{
		Lattice:       [][3]float64{{4, 0, 0}},
		Polarizations: 1,
		Sites:         []physics.Site{{Label: "A", MassAmu: m1, Frac: []float64{0}}, {Label: "B", MassAmu: m2, Frac: []float64{0.5}}},
		Springs:       []physics.Spring{{From: 0, To: 1, Cell: []int{0}, KLong: 1}, {From: 1, To: 0, Cell: []int{1}, KLong: 1}},
	}
}

// TestHashNearbyMasses: chains of masses (1, 1e6) and (1.00005, 1e6) amu
// are different models with different answers — at the zone boundary the
// optical branch of a diatomic chain is ω² = 2K/m₁ (m₁ < m₂; Ashcroft &
// Mermin, Solid State Physics, ch. 22) — so they hash apart, and each
// gives its own frequency.
func TestHashNearbyMasses(t *testing.T) {
	a, b := testmodels.Compile(t, twoChain(1, 1e6)), testmodels.Compile(t, twoChain(1.00005, 1e6))
	if a.Hash() == b.Hash() {
		t.Fatalf("both chains hash to %s", a.Hash())
	}
	for _, tc := range []struct {
		m  *physics.Model
		m1 float64
	}{{a, 1}, {b, 1.00005}} {
		got := tc.m.FrequenciesTHz([3]float64{0.5, 0, 0})[1]
		if want := math.Sqrt(2*1/tc.m1) * physics.NuUnitTHz; !relClose(got, want, 1e-12) {
			t.Errorf("m₁ = %v: optical branch at X %.12g THz; want %.12g", tc.m1, got, want)
		}
	}
}
