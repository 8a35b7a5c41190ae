package fit

import (
	"errors"
	"math"
	"sort"
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// violationFields runs Fit and returns the field paths of its
// *physics.ValidationError, sorted.
func violationFields(t *testing.T, p *Problem) []string {
	t.Helper()
	_, err := Fit(testmodels.Ctx(t), p)
	var ve *physics.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("Fit: %v; want a *physics.ValidationError", err)
	}
	var out []string
	for _, v := range ve.Violations {
		out = append(out, v.Field)
		if v.Description == "" {
			t.Errorf("%s: empty description", v.Field)
		}
	}
	sort.Strings(out)
	return out
}

// TestValidationNamesEveryField: a problem wrong in every part is refused
// with every bad field named at once, in the paths of the fit request.
func TestValidationNamesEveryField(t *testing.T) {
	p := &Problem{
		Crystal: testmodels.Chain(),
		Free: []Free{
			{Path: "springs[0].k_wrong"},
			{Path: "springs[3].k_long"},
			{Path: "springs[0].k_long", HasLower: true, Lower: 2, HasUpper: true, Upper: 1},
			{Path: "springs[0].kLong"},
			{Path: "springs[0].k_trans", HasLower: true, Lower: math.NaN()},
		},
		Ties: []Tie{{Path: "blocks[0].phi[0]", To: "springs[0].k_long"}, {Path: "springs[0].k_trans", To: "springs[0].k_long", Ratio: math.Inf(1)}},
		Frequencies: []Frequency{
			{Q: [3]float64{0.1}, FreqTHz: 1, SigmaTHz: 0},
			{Q: [3]float64{0.1, 0.2}, FreqTHz: math.NaN(), SigmaTHz: 1},
			{Q: [3]float64{}, FreqTHz: 1, SigmaTHz: 1, Branch: 1},
			{Q: [3]float64{0.2}, FreqTHz: 1, SigmaTHz: 1, Polarization: 7},
		},
		GammaFrequencies: []GammaFrequency{{FreqTHz: 1, SigmaTHz: 1, Branch: 1}},
		SoundVelocities:  []Velocity{{KmS: -1, SigmaKmS: 1}},
		ElasticConstants: []ElasticConstant{{I: 4, J: 2, GPa: 1, SigmaGPa: 1}},
		HeatCapacities: []HeatCapacitySet{{Grid: mesh.GridSpec{Mesh: [3]int{8, 2, 1}}, Basis: 9,
			Points: []HeatCapacity{{TempK: 0, Value: 1, Sigma: 1}, {TempK: 10, Value: 1, Sigma: -1}}}},
		MaxEvaluations: -1,
	}
	want := []string{
		"elastic_constants[0]", "elastic_constants[0].ij",
		"free[0].path", "free[1].path", "free[2].upper", "free[3].path", "free[4].lower",
		"frequencies[0].sigma_thz", "frequencies[1].frequency_thz", "frequencies[1].q.q2", "frequencies[2].branch", "frequencies[3].polarization",
		"gamma_frequencies[0].branch",
		"heat_capacities[0].basis", "heat_capacities[0].grid.mesh[1]", "heat_capacities[0].points[0].temperature_k", "heat_capacities[0].points[1].sigma",
		"max_evaluations",
		"sound_velocities[0].direction", "sound_velocities[0].km_s",
		"ties[0].path", "ties[1].path",
	}
	got := violationFields(t, p)
	if strings.Join(got, " ") != strings.Join(want, " ") {
		t.Errorf("violations\n got %v\nwant %v", got, want)
	}
}

// TestValidationAgainstTheModel: what only the compiled model can tell —
// a branch past the modes, a direction outside the lattice's span, a bad
// model — is named too.
func TestValidationAgainstTheModel(t *testing.T) {
	c := testmodels.Chain()
	p := &Problem{Crystal: c, Free: free("springs[0].k_long"),
		Frequencies:     []Frequency{{Q: [3]float64{0.1}, FreqTHz: 1, SigmaTHz: 1, Branch: 2}},
		SoundVelocities: []Velocity{{Dir: [3]float64{0, 1, 0}, KmS: 1, SigmaKmS: 1}}}
	got := violationFields(t, p)
	if want := "frequencies[0].branch sound_velocities[0].direction"; strings.Join(got, " ") != want {
		t.Errorf("violations %v; want %s", got, want)
	}
	bad := testmodels.Chain()
	bad.Sites[0].MassAmu = -1
	p = &Problem{Crystal: bad, Free: free("springs[0].k_long"), Frequencies: []Frequency{{Q: [3]float64{0.1}, FreqTHz: 1, SigmaTHz: 1}}}
	if got := violationFields(t, p); strings.Join(got, " ") != "model.sites[0].mass_amu" {
		t.Errorf("violations %v; want model.sites[0].mass_amu", got)
	}
}

// TestParsePath: the spellings a user may write, and the canonical form.
func TestParsePath(t *testing.T) {
	c := fixture()
	for _, tc := range []struct{ in, want string }{
		{"springs[1].k_long", "springs[1].k_long"},
		{"springs[1].kLong", "springs[1].k_long"},
		{"shells[0].kTrans", "shells[0].k_trans"},
		{"blocks[1].phi[8]", "blocks[1].phi[8]"},
	} {
		p, err := ParsePath(c, tc.in)
		if err != nil || p.String() != tc.want {
			t.Errorf("ParsePath(%q) = %v, %v; want %s", tc.in, p, err, tc.want)
		}
	}
	for _, bad := range []string{"", "springs", "springs[0]", "springs[-1].k_long", "springs[9].k_long", "sites[0].mass_amu",
		"blocks[0].phi", "blocks[0].phi[9]", "springs[0].k_long[1]", "springs[99999999999999999999].k_long"} {
		if _, err := ParsePath(c, bad); err == nil {
			t.Errorf("ParsePath(%q) accepted", bad)
		}
	}
}
