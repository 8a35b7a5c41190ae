package server

import (
	"testing"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// typedHoneycomb is an invented honeycomb net of two equal sites at
// (1/3, 2/3) and (2/3, 1/3), a = 2.46 Å, typed to 6 decimals.
func typedHoneycomb() *modegridv1.Crystal {
	return &modegridv1.Crystal{
		Lattice:       []*modegridv1.Vec3{{X: 2.46}, {X: -1.23, Y: 2.130422}},
		Polarizations: 3,
		Sites: []*modegridv1.Site{
			{Label: "A", MassAmu: 12, Frac: []float64{0.333333, 0.666667}},
			{Label: "B", MassAmu: 12, Frac: []float64{0.666667, 0.333333}},
		},
		Shells: []*modegridv1.Shell{{FromLabel: "A", ToLabel: "B", Shell: 1, KLong: 25, KTrans: 6}},
	}
}

// TestCheckSymmetryTolerance: over gRPC, the tolerance travels with the
// model, check reports it and the counts at looser tolerances (12 for the
// 6mm net, International Tables for Crystallography, Vol. A), a
// symmetrised model is a new, marked model, and a bad tolerance is
// INVALID_ARGUMENT naming the field.
func TestCheckSymmetryTolerance(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	tight := inline(typedHoneycomb())
	tight.SymmetryToleranceA = 1e-9
	r, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: tight})
	if err != nil {
		t.Fatal(err)
	}
	if r.GetSymmetryToleranceA() != 1e-9 || len(r.GetSymmetry()) >= 12 {
		t.Errorf("tolerance %g, %d operations; want 1e-9 and fewer than 12", r.GetSymmetryToleranceA(), len(r.GetSymmetry()))
	}
	looser := r.GetSymmetryAtLooserTolerance()
	if n := len(looser); n != 3 || looser[2].GetToleranceA() != 1e-4 || looser[2].GetOperations() != 12 {
		t.Errorf("looser tolerances %v; want 3, the last 12 operations at 1e-4 Å", looser)
	}
	plain, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: inline(typedHoneycomb())})
	if err != nil {
		t.Fatal(err)
	}
	if plain.GetModelHash() == r.GetModelHash() || len(plain.GetSymmetry()) != 12 || plain.GetSymmetrized() {
		t.Errorf("default tolerance: hash %s (tight %s), %d operations, symmetrized %v; want another hash, 12, false",
			plain.GetModelHash(), r.GetModelHash(), len(plain.GetSymmetry()), plain.GetSymmetrized())
	}
	sym := inline(typedHoneycomb())
	sym.Symmetrize = true
	s, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: sym})
	if err != nil {
		t.Fatal(err)
	}
	if s.GetModelHash() == plain.GetModelHash() || !s.GetSymmetrized() || len(s.GetSymmetry()) != 12 {
		t.Errorf("symmetrised: hash %s (plain %s), symmetrized %v, %d operations; want a new hash, true, 12",
			s.GetModelHash(), plain.GetModelHash(), s.GetSymmetrized(), len(s.GetSymmetry()))
	}
	bad := inline(typedHoneycomb())
	bad.SymmetryToleranceA = -1
	_, err = ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: bad, Points: 11,
		Path: []*modegridv1.PathPoint{{Label: "G"}, {Label: "K"}}})
	if f := badFields(t, err); f["model.symmetry_tolerance_a"] == "" {
		t.Errorf("violations %v; want model.symmetry_tolerance_a", f)
	}
}

// TestCheckModelBadToleranceIsACallError: CheckModel's report names
// fields of the crystal only; a bad symmetry tolerance (an option of the
// model source) is INVALID_ARGUMENT naming model.symmetry_tolerance_a, with
// the crystal's own violations (model.crystal.…) and the sites cap listed
// beside it, all at once. Before, the report carried the option's path,
// which is no field of Crystal (found by FuzzCheckModel).
func TestCheckModelBadToleranceIsACallError(t *testing.T) {
	ts := startServer(t, Config{MaxSites: 2})
	ctx := testContext(t)
	cases := []struct {
		name   string
		mutate func(src *modegridv1.ModelSource)
		want   []string
	}{
		{"tolerance only", func(src *modegridv1.ModelSource) { src.SymmetryToleranceA = 5 }, []string{"model.symmetry_tolerance_a"}},
		{"tolerance and a bad mass", func(src *modegridv1.ModelSource) {
			src.SymmetryToleranceA = -1
			src.GetCrystal().Sites[0].MassAmu = -12
		}, []string{"model.symmetry_tolerance_a", "model.crystal.sites[0].mass_amu"}},
		{"tolerance and over the sites cap", func(src *modegridv1.ModelSource) {
			src.SymmetryToleranceA = 1e-12
			c := src.GetCrystal()
			c.Sites = append(c.Sites, &modegridv1.Site{Label: "C", MassAmu: 1, Frac: []float64{0, 0}})
		}, []string{"model.symmetry_tolerance_a", "model.crystal.sites"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			src := inline(typedHoneycomb())
			tc.mutate(src)
			r, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: src})
			if err == nil {
				t.Fatalf("a report %v; want INVALID_ARGUMENT", r)
			}
			fields := badFields(t, err)
			for _, f := range tc.want {
				if fields[f] == "" {
					t.Errorf("violations %v; want %s", fields, f)
				}
			}
			if len(fields) != len(tc.want) {
				t.Errorf("violations %v; want exactly %v", fields, tc.want)
			}
		})
	}
	// A good tolerance with a bad crystal stays a report, paths relative
	// to Crystal.
	src := inline(typedHoneycomb())
	src.SymmetryToleranceA = 1e-3
	src.GetCrystal().Sites[1].MassAmu = -1
	r, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: src})
	if err != nil || r.GetValid() || len(r.GetViolations()) != 1 || r.GetViolations()[0].GetField() != "sites[1].mass_amu" {
		t.Errorf("got %v, %v; want a report naming sites[1].mass_amu", r, err)
	}
}
