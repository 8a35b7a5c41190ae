// One test case per validation rule of a model.

package physics_test

import (
	"context"
	"math"
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/physics"

	"github.com/materials-lab/modegrid/physics/mesh"
)

// threeD is a valid simple-cubic base with a shell.
func threeD() *physics.Crystal {
	return &physics.Crystal{
		Lattice: [][3]float64{{3, 0, 0}, {0, 3, 0}, {0, 0, 3}},
		Sites:   []physics.Site{{Label: "A", MassAmu: 10, Frac: []float64{0, 0, 0}}},
		Shells:  []physics.Shell{{FromLabel: "A", ToLabel: "A", Shell: 1, KLong: 1}},
	}
}

// TestValidationRules: every validation rule gives a violation on its
// field whose description names the bad value (common practice for
// input validation; the rules are those README.md lists under "The model
// file").
func TestValidationRules(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	cases := []struct {
		name   string
		base   func() *physics.Crystal
		mutate func(c *physics.Crystal)
		lim    physics.Limits
		field  string // expected field path
		want   string // substring of the description
	}{
		{"no sites", twoSiteChain, func(c *physics.Crystal) { c.Sites = nil; c.Springs = nil; c.Blocks = nil }, physics.Limits{}, "sites", "got none"},
		{"mass zero (missing in JSON)", twoSiteChain, func(c *physics.Crystal) { c.Sites[1].MassAmu = 0 }, physics.Limits{}, "sites[1].mass_amu", "is required (missing or 0)"},
		{"mass negative", twoSiteChain, func(c *physics.Crystal) { c.Sites[0].MassAmu = -1 }, physics.Limits{}, "sites[0].mass_amu", "got -1"},
		{"mass NaN", twoSiteChain, func(c *physics.Crystal) { c.Sites[0].MassAmu = nan }, physics.Limits{}, "sites[0].mass_amu", "finite, got NaN"},
		{"mass Inf", twoSiteChain, func(c *physics.Crystal) { c.Sites[0].MassAmu = inf }, physics.Limits{}, "sites[0].mass_amu", "finite, got +Inf"},
		{"lattice NaN", twoSiteChain, func(c *physics.Crystal) { c.Lattice[0][1] = nan }, physics.Limits{}, "lattice[0].y", "finite, got NaN"},
		{"frac Inf", twoSiteChain, func(c *physics.Crystal) { c.Sites[1].Frac[0] = -inf }, physics.Limits{}, "sites[1].frac[0]", "finite, got -Inf"},
		{"spring k NaN", twoSiteChain, func(c *physics.Crystal) { c.Springs[1].KTrans = nan }, physics.Limits{}, "springs[1].k_trans", "got NaN"},
		{"block phi Inf", twoSiteChain, func(c *physics.Crystal) { c.Blocks[0].Phi[4] = inf }, physics.Limits{}, "blocks[0].phi[4]", "got +Inf"},
		{"shell k NaN", threeD, func(c *physics.Crystal) { c.Shells[0].KLong = nan }, physics.Limits{}, "shells[0].k_long", "got NaN"},
		{"mass too small", twoSiteChain, func(c *physics.Crystal) { c.Sites[0].MassAmu = 1e-300 }, physics.Limits{}, "sites[0].mass_amu", "must be in [1e-06, 1e+09] amu"},
		{"mass too large", twoSiteChain, func(c *physics.Crystal) { c.Sites[1].MassAmu = 1e12 }, physics.Limits{}, "sites[1].mass_amu", "got 1e+12"},
		{"lattice too long", twoSiteChain, func(c *physics.Crystal) { c.Lattice[0][0] = 2.6e159 }, physics.Limits{}, "lattice[0].x", "within ±100000 Å"},
		{"frac too large", twoSiteChain, func(c *physics.Crystal) { c.Sites[0].Frac[0] = 7.88e115 }, physics.Limits{}, "sites[0].frac[0]", "within ±1000"},
		{"spring too stiff", twoSiteChain, func(c *physics.Crystal) { c.Springs[0].KLong = 1e300 }, physics.Limits{}, "springs[0].k_long", "within ±1e+06 eV/Å²"},
		{"spring too stiff in N/m", twoSiteChain, func(c *physics.Crystal) { c.ForceUnit = physics.NPerM; c.Springs[0].KLong = 2e7 }, physics.Limits{}, "springs[0].k_long", "N/m"},
		{"block element too large", twoSiteChain, func(c *physics.Crystal) { c.Blocks[0].Phi[0] = -1e7 }, physics.Limits{}, "blocks[0].phi[0]", "got -1e+07"},
		{"shell k denormal", threeD, func(c *physics.Crystal) { c.Shells[0].KTrans = 5.9e-303 }, physics.Limits{}, "shells[0].k_trans", "must be 0 or at least 1e-100 eV/Å² in magnitude, got 5.9e-303"},
		{"spring k tiny", twoSiteChain, func(c *physics.Crystal) { c.Springs[0].KLong = -1e-101 }, physics.Limits{}, "springs[0].k_long", "got -1e-101"},
		{"spring k tiny in N/m", twoSiteChain, func(c *physics.Crystal) { c.ForceUnit = physics.NPerM; c.Springs[0].KLong = 1e-99 }, physics.Limits{}, "springs[0].k_long", "at least 1.602176634e-99 N/m"},
		{"block element tiny", twoSiteChain, func(c *physics.Crystal) { c.Blocks[0].Phi[1] = 4.9e-324 }, physics.Limits{}, "blocks[0].phi[1]", "got 5e-324"},
		{"spring of zero length", twoSiteChain, func(c *physics.Crystal) {
			c.Sites[0].Frac[0] = 0.5
			c.Sites[1].Frac[0] = 0.25
			c.Springs[0].Cell[0] = 0
			c.Springs[0].To = 1
			c.Springs[0].From = 0
			c.Sites[1].Frac[0] = 0.5 + 1e-9
		}, physics.Limits{}, "springs[0]", "a spring needs two separate ends"},
		{"no lattice", twoSiteChain, func(c *physics.Crystal) { c.Lattice = nil }, physics.Limits{}, "lattice", "got none"},
		{"four lattice vectors", threeD, func(c *physics.Crystal) { c.Lattice = append(c.Lattice, [3]float64{1, 1, 1}) }, physics.Limits{}, "lattice", "got 4"},
		{"zero-length vector", threeD, func(c *physics.Crystal) { c.Lattice[1] = [3]float64{} }, physics.Limits{}, "lattice[1]", "length 0"},
		{"collinear vectors", threeD, func(c *physics.Crystal) { c.Lattice[2] = [3]float64{6, 0, 0} }, physics.Limits{}, "lattice", "degenerate: cell volume 0"},
		{"nearly coplanar vectors", threeD, func(c *physics.Crystal) { c.Lattice[2] = [3]float64{3, 3, 2e-6} }, physics.Limits{}, "lattice", "nearly linearly dependent"},
		{"degenerate 2D", func() *physics.Crystal {
			return &physics.Crystal{Lattice: [][3]float64{{2, 0, 0}, {-4, 0, 0}}, Sites: []physics.Site{{Label: "A", MassAmu: 1, Frac: []float64{0, 0}}}}
		}, nil, physics.Limits{}, "lattice", "cell area"},
		{"frac wrong length", twoSiteChain, func(c *physics.Crystal) { c.Sites[0].Frac = []float64{0, 0} }, physics.Limits{}, "sites[0].frac", "must have 1 numbers"},
		{"spring cell wrong length", twoSiteChain, func(c *physics.Crystal) { c.Springs[0].Cell = nil }, physics.Limits{}, "springs[0].cell", "got 0"},
		{"block cell wrong length", twoSiteChain, func(c *physics.Crystal) { c.Blocks[0].Cell = []int{1, 0} }, physics.Limits{}, "blocks[0].cell", "got 2"},
		{"block phi wrong length", twoSiteChain, func(c *physics.Crystal) { c.Blocks[0].Phi = c.Blocks[0].Phi[:4] }, physics.Limits{}, "blocks[0].phi", "got 4"},
		{"sites on the same point", twoSiteChain, func(c *physics.Crystal) { c.Sites[1].Frac[0] = 0 }, physics.Limits{}, "sites[1].frac", "same point as sites[0]"},
		{"sites one lattice vector apart", twoSiteChain, func(c *physics.Crystal) { c.Sites[1].Frac[0] = 1 }, physics.Limits{}, "sites[1].frac", "same point as sites[0]"},
		{"bonded to itself", twoSiteChain, func(c *physics.Crystal) { c.Springs[0].To = 0 }, physics.Limits{}, "springs[0]", "bonded to itself"},
		{"index out of range", twoSiteChain, func(c *physics.Crystal) { c.Springs[1].To = 2 }, physics.Limits{}, "springs[1].to_site", "index 2 out of range [0, 2)"},
		{"negative index", twoSiteChain, func(c *physics.Crystal) { c.Blocks[0].From = -1 }, physics.Limits{}, "blocks[0].from_site", "index -1"},
		{"duplicate bond", twoSiteChain, func(c *physics.Crystal) { c.Springs = append(c.Springs, c.Springs[0]) }, physics.Limits{}, "springs[2]", "same bond as springs[0]"},
		{"duplicate bond as its reverse", twoSiteChain, func(c *physics.Crystal) {
			c.Springs = append(c.Springs, physics.Spring{From: 1, To: 0, Cell: []int{0}, KLong: 2})
		}, physics.Limits{}, "springs[2]", "same bond as springs[0]"},
		{"self-image bond as its own reverse", twoSiteChain, func(c *physics.Crystal) {
			c.Springs = append(c.Springs, physics.Spring{From: 0, To: 0, Cell: []int{2}, KLong: 1}, physics.Spring{From: 0, To: 0, Cell: []int{-2}, KLong: 1})
		}, physics.Limits{}, "springs[3]", "same bond as springs[2]"},
		{"duplicate block as its reverse", twoSiteChain, func(c *physics.Crystal) {
			c.Blocks = append(c.Blocks, physics.Block{From: 0, To: 0, Cell: []int{-1}, Phi: make([]float64, 9)})
		}, physics.Limits{}, "blocks[1]", "same site pair and cell as blocks[0]"},
		{"shell with unknown label", threeD, func(c *physics.Crystal) { c.Shells[0].ToLabel = "Z" }, physics.Limits{}, "shells[0].to_label", `"Z"`},
		{"shell number zero", threeD, func(c *physics.Crystal) { c.Shells[0].Shell = 0 }, physics.Limits{}, "shells[0].shell", "got 0"},
		{"shell number too high", threeD, func(c *physics.Crystal) { c.Shells[0].Shell = 21 }, physics.Limits{}, "shells[0].shell", "got 21"},
		{"duplicate shell", threeD, func(c *physics.Crystal) {
			c.Sites = append(c.Sites, physics.Site{Label: "B", MassAmu: 5, Frac: []float64{0.5, 0.5, 0.5}})
			c.Shells = append(c.Shells, physics.Shell{FromLabel: "A", ToLabel: "B", Shell: 1, KLong: 1}, physics.Shell{FromLabel: "B", ToLabel: "A", Shell: 1, KLong: 2})
		}, physics.Limits{}, "shells[2]", "already shells[1]"},
		{"shell that finds no neighbours", threeD, func(c *physics.Crystal) { c.Shells[0].Shell = 5 }, physics.Limits{MaxCellOffset: 1}, "shells[0]", "found no neighbours in shell 5"},
		{"polarizations too high", twoSiteChain, func(c *physics.Crystal) { c.Polarizations = 4 }, physics.Limits{}, "polarizations", "got 4"},
		{"polarizations negative", twoSiteChain, func(c *physics.Crystal) { c.Polarizations = -1 }, physics.Limits{}, "polarizations", "got -1"},
		{"unknown force unit", twoSiteChain, func(c *physics.Crystal) { c.ForceUnit = 7 }, physics.Limits{}, "force_unit", "unknown unit 7"},
		{"too many sites", twoSiteChain, nil, physics.Limits{MaxSites: 1}, "sites", "more than the limit of 1"},
		{"too many interactions", twoSiteChain, nil, physics.Limits{MaxInteractions: 2}, "springs", "number 3, more than the limit of 2"},
		{"too many shell bonds", threeD, nil, physics.Limits{MaxInteractions: 2}, "shells", "number 3, more than the limit of 2"},
		{"cell offset past the limit", twoSiteChain, func(c *physics.Crystal) { c.Springs[1].Cell[0] = 4 }, physics.Limits{MaxCellOffset: 3}, "springs[1].cell[0]", "offset 4 exceeds the limit of ±3"},
		{"default cell offset limit", twoSiteChain, func(c *physics.Crystal) { c.Blocks[0].Cell[0] = -65 }, physics.Limits{}, "blocks[0].cell[0]", "limit of ±64"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c := tc.base()
			if tc.mutate != nil {
				tc.mutate(c)
			}
			_, err := physics.Compile(context.Background(), c, physics.Options{Limits: tc.lim})
			vs := violationsOf(t, err)
			for _, v := range vs {
				if v.Field == tc.field && strings.Contains(v.Description, tc.want) {
					return
				}
			}
			t.Fatalf("no violation %s: …%s…; got %v", tc.field, tc.want, vs)
		})
	}
}

// TestValidationBasesAreValid keeps the mutation bases honest, and the
// default limits accept their boundary values (an offset of exactly 64,
// an on-site block).
func TestValidationBasesAreValid(t *testing.T) {
	for _, c := range []*physics.Crystal{twoSiteChain(), threeD()} {
		if _, err := physics.Compile(context.Background(), c, physics.Options{}); err != nil {
			t.Fatalf("base model invalid: %v", err)
		}
	}
	c := twoSiteChain()
	c.Blocks[0].Cell[0] = 64
	c.Blocks = append(c.Blocks, physics.Block{From: 1, To: 1, Cell: []int{0}, Phi: []float64{0.5, 0, 0, 0, 0, 0, 0, 0, 0}})
	if _, err := physics.Compile(context.Background(), c, physics.Options{}); err != nil {
		t.Fatalf("offset 64 and an on-site block must be accepted: %v", err)
	}
}

// TestValidationDefaultSiteLimit: 512 sites pass Validate, 513 do not
// (DefaultMaxSites, the default limit README.md documents).
func TestValidationDefaultSiteLimit(t *testing.T) {
	for _, tc := range []struct {
		name string
		n    int
		ok   bool
	}{{"512 sites", 512, true}, {"513 sites", 513, false}} {
		t.Run(tc.name, func(t *testing.T) {
			c := &physics.Crystal{Lattice: [][3]float64{{float64(tc.n), 0, 0}}, Polarizations: 1}
			for i := 0; i < tc.n; i++ {
				c.Sites = append(c.Sites, physics.Site{Label: "A", MassAmu: 1, Frac: []float64{float64(i) / float64(tc.n)}})
			}
			err := physics.Validate(c, physics.Limits{})
			if (err == nil) != tc.ok {
				t.Fatalf("Validate: %v; want ok=%v", err, tc.ok)
			}
		})
	}
}

// TestValidationDefaultInteractionLimit: 200 000 springs pass, 200 001 do
// not (DefaultMaxInteractions, the default limit README.md documents).
func TestValidationDefaultInteractionLimit(t *testing.T) {
	if testing.Short() {
		t.Skip("builds 200 001 springs")
	}
	c := &physics.Crystal{Lattice: [][3]float64{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}}, Sites: []physics.Site{{Label: "A", MassAmu: 1, Frac: []float64{0, 0, 0}}}}
	for x := -40; x <= 40 && len(c.Springs) < 200001; x++ {
		for y := -40; y <= 40 && len(c.Springs) < 200001; y++ {
			for z := 1; z <= 40 && len(c.Springs) < 200001; z++ {
				c.Springs = append(c.Springs, physics.Spring{From: 0, To: 0, Cell: []int{x, y, z}, KLong: 1})
			}
		}
	}
	if err := physics.Validate(&physics.Crystal{Lattice: c.Lattice, Sites: c.Sites, Springs: c.Springs[:200000]}, physics.Limits{}); err != nil {
		t.Fatalf("200 000 springs: %v", err)
	}
	vs := violationsOf(t, physics.Validate(c, physics.Limits{}))
	if len(vs) != 1 || vs[0].Field != "springs" || !strings.Contains(vs[0].Description, "200001") {
		t.Fatalf("200 001 springs: %v", vs)
	}
}

// TestValidationReportsEverything: one model with several faults reports
// all of them in one error.
func TestValidationReportsEverything(t *testing.T) {
	c := twoSiteChain()
	c.Sites[0].MassAmu = -2
	c.Springs[0].To = 9
	c.Blocks[0].Phi[0] = math.NaN()
	c.Polarizations = 5
	vs := violationsOf(t, physics.Validate(c, physics.Limits{}))
	want := []string{"sites[0].mass_amu", "springs[0].to_site", "blocks[0].phi[0]", "polarizations"}
	for _, f := range want {
		found := false
		for _, v := range vs {
			found = found || v.Field == f
		}
		if !found {
			t.Errorf("missing violation on %s; got %v", f, vs)
		}
	}
}

// TestValidateQPoints: non-finite components and components past d.
func TestValidateQPoints(t *testing.T) {
	vs := violationsOf(t, physics.ValidateQPoints(2, []mesh.QPoint{{Q: [3]float64{0.1, 0.2, 0}}, {Q: [3]float64{math.NaN(), 0, 0.3}}}, "qpoints"))
	if len(vs) != 2 || vs[0].Field != "qpoints[1].q1" || vs[1].Field != "qpoints[1].q3" || !strings.Contains(vs[1].Description, "got 0.3") {
		t.Fatalf("got %v", vs)
	}
	if err := physics.ValidateQPoints(3, []mesh.QPoint{{Q: [3]float64{0.5, -0.5, 0.25}}}, "q"); err != nil {
		t.Fatal(err)
	}
}
