// Tests of dispersion paths.

package physics_test

import (
	"math"
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// TestDispersionFCC walks G–X–W–K–G–L on the fcc example with built-in
// labels: corner samples carry their labels and the closed-form
// frequencies of TestFCCNearestNeighbour*, the cumulative distance at each
// corner is the sum of the segment lengths |ΓX| = 2π/a, |XW| = π/a,
// |WK| = π/(√2 a), |KΓ| = 3π/(√2 a), |ΓL| = √3π/a (from the Cartesian
// points; common practice), and the sample count is exact.
func TestDispersionFCC(t *testing.T) {
	c := testmodels.Load(t, "fcc")
	m := testmodels.Compile(t, c)
	K, M := c.Shells[0].KLong, c.Sites[0].MassAmu
	a := 2 * c.Lattice[0][1]
	corners := []physics.PathCorner{{Label: "G"}, {Label: "X"}, {Label: "W"}, {Label: "K"}, {Label: "Γ"}, {Label: "L"}}
	s, err := m.Dispersion(testCtx(t), corners, physics.PathOptions{Points: 120})
	if err != nil {
		t.Fatal(err)
	}
	if len(s) != 120 {
		t.Fatalf("%d samples; want 120", len(s))
	}
	pi := math.Pi
	wantDist := []float64{0, 2 * pi / a, 3 * pi / a, 3*pi/a + pi/(math.Sqrt2*a), 3*pi/a + 4*pi/(math.Sqrt2*a), 3*pi/a + 4*pi/(math.Sqrt2*a) + math.Sqrt(3)*pi/a}
	wantW2 := map[string][]float64{"G": {0, 0, 0}, "Γ": {0, 0, 0}, "X": {4, 4, 8}, "W": {4, 6, 6}, "K": {2 + math.Sqrt2, 4 + math.Sqrt2, 4 + 2*math.Sqrt2}, "L": {2, 2, 8}}
	ci := 0
	for i, x := range s {
		if i > 0 && x.DistanceInvA < s[i-1].DistanceInvA {
			t.Fatalf("distance decreases at sample %d", i)
		}
		if x.Label == "" {
			continue
		}
		if x.Label != corners[ci].Label {
			t.Fatalf("sample %d label %q; want %q", i, x.Label, corners[ci].Label)
		}
		if math.Abs(x.DistanceInvA-wantDist[ci]) > 1e-12 {
			t.Errorf("%s at %.12g Å⁻¹; want %.12g", x.Label, x.DistanceInvA, wantDist[ci])
		}
		for k, w := range wantW2[x.Label] {
			// Zero modes are zero to rounding: ε‖D‖ in ω² is ~1e-7 THz.
			tol := 1e-9
			if w == 0 {
				tol = 1e-6
			}
			if want := math.Sqrt(w*K/M) * physics.NuUnitTHz; math.Abs(x.FreqTHz[k]-want) > tol {
				t.Errorf("%s branch %d: %.10g; want %.10g", x.Label, k, x.FreqTHz[k], want)
			}
		}
		ci++
	}
	if ci != len(corners) {
		t.Errorf("%d labelled samples; want %d", ci, len(corners))
	}
}

// TestDispersionSpacingAndBreaks: with a spacing every step is at most the
// spacing; a break starts a new piece without adding the jump to the
// distance; explicit coordinates mix with labels.
func TestDispersionSpacingAndBreaks(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "square-net"))
	corners := []physics.PathCorner{
		{Label: "G"}, {Label: "X"},
		{Label: "M", BreakBefore: true}, {Label: "mid", Q: [3]float64{0.25, 0.25, 0}, HasQ: true},
	}
	const sp = 0.05
	s, err := m.Dispersion(testCtx(t), corners, physics.PathOptions{SpacingInvA: sp})
	if err != nil {
		t.Fatal(err)
	}
	a := 3.0
	gx := math.Pi / a                  // |ΓX|
	mm := math.Sqrt2 * math.Pi / a / 2 // |M → (¼,¼)|
	var breakAt int
	for i := 1; i < len(s); i++ {
		step := s[i].DistanceInvA - s[i-1].DistanceInvA
		if s[i].Label == "M" {
			breakAt = i
			if step != 0 {
				t.Errorf("the break added %v Å⁻¹", step)
			}
			continue
		}
		if step > sp+1e-12 || step <= 0 {
			t.Errorf("step %d = %v Å⁻¹; want (0, %v]", i, step, sp)
		}
	}
	if want := int(math.Ceil(gx/sp)) + 1; breakAt != want {
		t.Errorf("first piece has %d samples; want %d", breakAt, want)
	}
	if last := s[len(s)-1]; last.Label != "mid" || math.Abs(last.DistanceInvA-gx-mm) > 1e-12 || last.Q != [3]float64{0.25, 0.25, 0} {
		t.Errorf("last sample %+v; want mid at %v", last, gx+mm)
	}
}

// TestDispersionValidation: unknown labels, bad coordinates and options
// are reported with their fields, all at once.
func TestDispersionValidation(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	cases := []struct {
		name    string
		corners []physics.PathCorner
		opt     physics.PathOptions
		field   string
		want    string
	}{
		{"unknown label", []physics.PathCorner{{Label: "G"}, {Label: "X"}, {Label: "Q"}}, physics.PathOptions{}, "path[2].label", `unknown label "Q" for this fcc lattice (built in: G, K, L, U, W, X)`},
		{"one corner", []physics.PathCorner{{Label: "G"}}, physics.PathOptions{}, "path", "at least 2"},
		{"no label, no q", []physics.PathCorner{{Label: "G"}, {}}, physics.PathOptions{}, "path[1]", "needs coordinates"},
		{"NaN coordinate", []physics.PathCorner{{Label: "G"}, {Q: [3]float64{math.NaN(), 0, 0}, HasQ: true}}, physics.PathOptions{}, "path[1].q.q1", "got NaN"},
		{"repeated point", []physics.PathCorner{{Label: "X"}, {Label: "X"}}, physics.PathOptions{}, "path[1]", "same point as path[0]"},
		{"lonely piece", []physics.PathCorner{{Label: "G"}, {Label: "X"}, {Label: "L", BreakBefore: true}}, physics.PathOptions{}, "path[2]", "alone in its piece"},
		{"too few points", []physics.PathCorner{{Label: "G"}, {Label: "X"}, {Label: "L"}}, physics.PathOptions{Points: 2}, "points", "at least the number of path points (3), got 2"},
		{"negative spacing", []physics.PathCorner{{Label: "G"}, {Label: "X"}}, physics.PathOptions{SpacingInvA: -1}, "spacing_inv_a", "got -1"},
		{"tiny spacing", []physics.PathCorner{{Label: "G"}, {Label: "X"}}, physics.PathOptions{SpacingInvA: 1e-9}, "spacing_inv_a", "more than 200000 samples"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := m.Dispersion(testCtx(t), tc.corners, tc.opt)
			for _, v := range violationsOf(t, err) {
				if v.Field == tc.field && strings.Contains(v.Description, tc.want) {
					return
				}
			}
			t.Fatalf("want %s: …%s…; got %v", tc.field, tc.want, err)
		})
	}
	// A 2D net on an unrecognised lattice still knows Γ.
	obl := testmodels.Compile(t, &physics.Crystal{Lattice: [][3]float64{{3, 0, 0}, {1, 4, 0}}, Polarizations: 2,
		Sites:  []physics.Site{{Label: "A", MassAmu: 1, Frac: []float64{0, 0}}},
		Shells: []physics.Shell{{FromLabel: "A", ToLabel: "A", Shell: 1, KLong: 1}}})
	if _, err := obl.Dispersion(testCtx(t), []physics.PathCorner{{Label: "G"}, {Q: [3]float64{0.5, 0, 0}, HasQ: true}}, physics.PathOptions{}); err != nil {
		t.Errorf("Γ on an oblique net: %v", err)
	}
}

// TestConnectedBranchesCross: the two uncoupled chains of crossingChains
// cross at q = 1/3; sorted frequencies swap branches there, connected ones
// follow each chain's own dispersion ω_A = 2 sqrt(K/M)|sin πq|, ω_B =
// 2 sqrt(K/M)|sin 2πq| (Kittel ch. 4) through the crossing, also when the
// crossing is itself a sample.
func TestConnectedBranchesCross(t *testing.T) {
	c := crossingChains()
	m := testmodels.Compile(t, c)
	K, M := c.Springs[0].KLong, c.Sites[0].MassAmu
	wA := func(q float64) float64 { return 2 * math.Sqrt(K/M) * math.Abs(math.Sin(math.Pi*q)) * physics.NuUnitTHz }
	wB := func(q float64) float64 {
		return 2 * math.Sqrt(K/M) * math.Abs(math.Sin(2*math.Pi*q)) * physics.NuUnitTHz
	}
	for _, points := range []int{61, 64} { // 61: q = 1/3 is sample 20
		s, err := m.Dispersion(testCtx(t), []physics.PathCorner{{Label: "G"}, {Label: "X"}}, physics.PathOptions{Points: points, FollowModes: true})
		if err != nil {
			t.Fatal(err)
		}
		// Which branch is A is decided just off Γ; after that it must
		// stay.
		bA := 0
		if math.Abs(s[1].FreqTHz[1]-wA(s[1].Q[0])) < 1e-9 {
			bA = 1
		}
		for _, x := range s {
			q := x.Q[0]
			if math.Abs(x.FreqTHz[bA]-wA(q)) > 1e-9 || math.Abs(x.FreqTHz[1-bA]-wB(q)) > 1e-9 {
				t.Fatalf("points=%d q=%.6f: branches %v; want A=%v B=%v", points, q, x.FreqTHz, wA(q), wB(q))
			}
		}
		sorted, err := m.Dispersion(testCtx(t), []physics.PathCorner{{Label: "G"}, {Label: "X"}}, physics.PathOptions{Points: points})
		if err != nil {
			t.Fatal(err)
		}
		last := sorted[len(sorted)-1]
		if last.FreqTHz[0] > last.FreqTHz[1] {
			t.Errorf("unconnected samples must be ascending: %v", last.FreqTHz)
		}
	}
}

// TestSiteWeightsDiatomicChain: the shares of the two sites of a diatomic
// chain with equal springs (masses m1, m2, M = m1 + m2), derived from its
// equations of motion (Kittel, Introduction to Solid State Physics, ch. 4):
// at Γ the acoustic mode moves both sites alike (u1 = u2, so the
// mass-weighted e_s ∝ √m_s u_s gives shares m1/M, m2/M) and the optical
// mode keeps the centre of mass still (m1u1 = −m2u2: shares m2/M, m1/M);
// at the zone boundary the acoustic mode (ω² = 2K/m2, m2 > m1) moves only
// the heavy site and the optical one (ω² = 2K/m1) only the light one.
// Shares sum to 1 per branch everywhere, with and without following.
func TestSiteWeightsDiatomicChain(t *testing.T) {
	const m1, m2 = 20.0, 70.0 // our own example numbers
	m := testmodels.Compile(t, diatomicChainK(5, m1, m2, 3, 3))
	for _, follow := range []bool{false, true} {
		s, err := m.Dispersion(testCtx(t), []physics.PathCorner{{Label: "G"}, {Label: "X"}}, physics.PathOptions{Points: 11, SiteWeights: true, FollowModes: follow})
		if err != nil {
			t.Fatal(err)
		}
		check := func(i int, want []float64) {
			t.Helper()
			for k, w := range want {
				if math.Abs(s[i].SiteWeight[k]-w) > 1e-9 {
					t.Errorf("follow=%v sample %d (q=%v): shares %v; want %v", follow, i, s[i].Q[0], s[i].SiteWeight, want)
					return
				}
			}
		}
		M := m1 + m2
		check(0, []float64{m1 / M, m2 / M, m2 / M, m1 / M})
		check(len(s)-1, []float64{0, 1, 1, 0})
		for i, x := range s {
			if len(x.SiteWeight) != 4 {
				t.Fatalf("sample %d: %d shares; want 2 branches × 2 sites", i, len(x.SiteWeight))
			}
			for b := 0; b < 2; b++ {
				if sum := x.SiteWeight[2*b] + x.SiteWeight[2*b+1]; math.Abs(sum-1) > 1e-12 {
					t.Errorf("sample %d branch %d: shares sum to %v; want 1", i, b, sum)
				}
			}
		}
	}
	plain, err := m.Dispersion(testCtx(t), []physics.PathCorner{{Label: "G"}, {Label: "X"}}, physics.PathOptions{Points: 11})
	if err != nil {
		t.Fatal(err)
	}
	if plain[3].SiteWeight != nil {
		t.Error("shares returned without being asked for")
	}
}

// TestSiteWeightsFollowCrossing: the uncoupled chains of crossingChains
// keep their motion on their own site; followed through the crossing
// (which is itself a sample at 61 points), each branch stays wholly on one
// site, where sorted samples would swap sites at q = 1/3.
func TestSiteWeightsFollowCrossing(t *testing.T) {
	m := testmodels.Compile(t, crossingChains())
	s, err := m.Dispersion(testCtx(t), []physics.PathCorner{{Label: "G"}, {Label: "X"}}, physics.PathOptions{Points: 61, FollowModes: true, SiteWeights: true})
	if err != nil {
		t.Fatal(err)
	}
	first := s[1].SiteWeight // just off Γ, where the branches are told apart
	for i, x := range s[1:] {
		for k := range first {
			if math.Abs(x.SiteWeight[k]-first[k]) > 1e-9 || (first[k] > 1e-9 && math.Abs(first[k]-1) > 1e-9) {
				t.Fatalf("sample %d (q=%v): shares %v; want %v, each 0 or 1", i+1, x.Q[0], x.SiteWeight, first)
			}
		}
	}
}
