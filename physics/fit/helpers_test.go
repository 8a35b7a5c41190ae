package fit

import (
	"context"
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// fixture is a two-site orthorhombic crystal with one of every parameter
// kind — springs (k_long, k_trans), a shell, an explicit block — chosen
// without symmetry between its axes, so that modes away from Γ are not
// degenerate. Invented numbers; the model is stable (checked by
// TestFixtureStable).
func fixture() *physics.Crystal {
	return &physics.Crystal{
		Name:    "fixture",
		Lattice: [][3]float64{{3.0, 0, 0}, {0, 3.3, 0}, {0, 0, 3.7}},
		Sites: []physics.Site{
			{Label: "A", MassAmu: 30, Frac: []float64{0, 0, 0}},
			{Label: "B", MassAmu: 50, Frac: []float64{0.5, 0.45, 0.55}},
		},
		Springs: []physics.Spring{
			{From: 0, To: 1, Cell: []int{0, 0, 0}, KLong: 5, KTrans: 0.8},
			{From: 0, To: 0, Cell: []int{1, 0, 0}, KLong: 2, KTrans: 0.3},
			{From: 1, To: 1, Cell: []int{0, 0, 1}, KLong: 1.2, KTrans: 0.25},
		},
		Shells: []physics.Shell{{FromLabel: "B", ToLabel: "B", Shell: 1, KLong: 1.5, KTrans: 0.2}},
		Blocks: []physics.Block{
			{From: 0, To: 1, Cell: []int{-1, 0, 0}, Phi: []float64{-1.0, 0.2, 0.1, 0.2, -0.8, 0.05, 0.1, 0.05, -0.6}},
			{From: 0, To: 0, Cell: []int{0, 1, 0}, Phi: []float64{-0.3, 0, 0, 0, -0.9, 0, 0, 0, -0.2}},
		},
	}
}

// compile compiles c or fails the test.
func compile(t testing.TB, c *physics.Crystal) *physics.Model {
	t.Helper()
	m, err := physics.Compile(context.Background(), c, physics.Options{})
	if err != nil {
		t.Fatalf("compile %s: %v", c.Name, err)
	}
	return m
}

// dispersion returns the frequencies of m at every q, every branch
// labelled when label is set, with σ = sigma(ν).
func dispersion(m *physics.Model, qs [][3]float64, label bool, sigma func(nu float64) float64) []Frequency {
	var out []Frequency
	for _, q := range qs {
		nu := m.FrequenciesTHz(q)
		for b, f := range nu {
			if physics.IsGamma(q) && b < m.Polarizations() {
				continue
			}
			d := Frequency{Q: q, FreqTHz: f, SigmaTHz: sigma(f)}
			if label {
				d.Branch = b + 1
			}
			out = append(out, d)
		}
	}
	return out
}

// fitOK runs Fit and fails the test on an error.
func fitOK(t testing.TB, p *Problem) *Result {
	t.Helper()
	res, err := Fit(testmodels.Ctx(t), p)
	if err != nil {
		t.Fatalf("Fit: %v", err)
	}
	return res
}

// relErr is |got − want| / |want| (|got − want| for want 0).
func relErr(got, want float64) float64 {
	if want == 0 {
		return math.Abs(got)
	}
	return math.Abs(got-want) / math.Abs(want)
}

// paths lists the paths of free parameters.
func free(paths ...string) []Free {
	out := make([]Free, len(paths))
	for i, p := range paths {
		out[i] = Free{Path: p}
	}
	return out
}

// setPath writes v at path in c.
func setPath(t testing.TB, c *physics.Crystal, path string, v float64) {
	t.Helper()
	p, err := ParsePath(c, path)
	if err != nil {
		t.Fatal(err)
	}
	p.set(c, v)
}

// getPath reads path in c.
func getPath(t testing.TB, c *physics.Crystal, path string) float64 {
	t.Helper()
	p, err := ParsePath(c, path)
	if err != nil {
		t.Fatal(err)
	}
	return p.Get(c)
}
