// Loading the built-in example crystals in tests (a test-only mirror of
// the protobuf JSON mapping: physics must not import proto/).

package physics

import (
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"testing"
)

// exampleDir holds the built-in example crystals (the protobuf JSON model
// files shared with the service and the demo).
var exampleDir = filepath.Join("..", "proto", "examples")

// exampleNames lists every example crystal in the repository.
func exampleNames(t testing.TB) []string {
	t.Helper()
	m, err := filepath.Glob(filepath.Join(exampleDir, "*.json"))
	if err != nil || len(m) == 0 {
		t.Fatalf("no example crystals in %s: %v", exampleDir, err)
	}
	var names []string
	for _, p := range m {
		b := filepath.Base(p)
		names = append(names, b[:len(b)-len(".json")])
	}
	return names
}

// loadExample decodes an example model file with encoding/json. This mirror
// of the protobuf JSON mapping is test-only: physics must not import proto/.
func loadExample(t testing.TB, name string) *Crystal {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(exampleDir, name+".json"))
	if err != nil {
		t.Fatal(err)
	}
	return decodeCrystal(t, name, b)
}

// decodeCrystal decodes a model file text (see loadExample).
func decodeCrystal(t testing.TB, name string, b []byte) *Crystal {
	t.Helper()
	var f struct {
		Name          string
		Lattice       []struct{ X, Y, Z float64 }
		Polarizations int
		ForceUnit     string
		Sites         []struct {
			Label   string
			MassAmu float64
			Frac    []float64
		}
		Springs []struct {
			From          int `json:"fromSite"`
			To            int `json:"toSite"`
			Cell          []int
			KLong, KTrans float64
		}
		Shells []struct {
			FromLabel, ToLabel string
			Shell              int
			KLong, KTrans      float64
		}
		Blocks []struct {
			From int `json:"fromSite"`
			To   int `json:"toSite"`
			Cell []int
			Phi  []float64
		}
	}
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	c := &Crystal{Name: f.Name, Polarizations: f.Polarizations}
	if f.ForceUnit == "FORCE_UNIT_N_PER_M" {
		c.ForceUnit = NPerM
	}
	for _, v := range f.Lattice {
		c.Lattice = append(c.Lattice, [3]float64{v.X, v.Y, v.Z})
	}
	for _, s := range f.Sites {
		c.Sites = append(c.Sites, Site{Label: s.Label, MassAmu: s.MassAmu, Frac: s.Frac})
	}
	for _, s := range f.Springs {
		c.Springs = append(c.Springs, Spring{From: s.From, To: s.To, Cell: s.Cell, KLong: s.KLong, KTrans: s.KTrans})
	}
	for _, s := range f.Shells {
		c.Shells = append(c.Shells, Shell{FromLabel: s.FromLabel, ToLabel: s.ToLabel, Shell: s.Shell, KLong: s.KLong, KTrans: s.KTrans})
	}
	for _, s := range f.Blocks {
		c.Blocks = append(c.Blocks, Block{From: s.From, To: s.To, Cell: s.Cell, Phi: s.Phi})
	}
	return c
}

func mustCompile(t testing.TB, c *Crystal) *Model {
	t.Helper()
	m, err := Compile(context.Background(), c, Options{})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// mustSymmetry is Model.Symmetry without a deadline.
func mustSymmetry(t testing.TB, m *Model) []SymOp {
	t.Helper()
	ops, err := m.Symmetry(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	return ops
}

// mustSound is Model.SoundVelocities without a deadline.
func mustSound(t testing.TB, m *Model, dir [3]float64) []float64 {
	t.Helper()
	v, err := m.SoundVelocities(context.Background(), dir)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// mustElasticTheta is Model.ElasticDebyeTemperature without a deadline.
func mustElasticTheta(t testing.TB, m *Model) float64 {
	t.Helper()
	th, err := m.ElasticDebyeTemperature(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	return th
}

// mustSpeedsATHz is acousticSpeedsATHz without a deadline.
func mustSpeedsATHz(t testing.TB, m *Model, dir [3]float64) []float64 {
	t.Helper()
	v, err := acousticSpeedsATHz(context.Background(), m, dir)
	if err != nil {
		t.Fatal(err)
	}
	return v
}
