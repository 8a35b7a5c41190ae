package server

import (
	"math"
	"strings"
	"testing"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

func TestCheckModel(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	t.Run("valid fcc", func(t *testing.T) {
		r, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: inline(example(t, "fcc"))})
		if err != nil {
			t.Fatal(err)
		}
		if !r.GetValid() || !isHash(r.GetModelHash()) || r.GetDimensions() != 3 || r.GetSites() != 1 || r.GetModesPerCell() != 3 {
			t.Errorf("summary %v", r)
		}
		// The fcc lattice with one site and central nearest-neighbour
		// springs has the full cubic point group O_h of 48 operations
		// (International Tables for Crystallography, Vol. A, Fm-3m).
		if n := len(r.GetSymmetry()); n != 48 {
			t.Errorf("%d symmetry operations; want 48", n)
		}
		// 12 nearest neighbours in fcc (Kittel, ch. 1, Table 2), each bond
		// listed once: 6.
		if sh := r.GetShells(); len(sh) != 1 || sh[0].GetBonds() != 6 || math.Abs(sh[0].GetDistanceA()-2*math.Sqrt2) > 1e-9 {
			t.Errorf("shells %v; want one shell of 6 bonds at 2√2 Å", sh)
		}
		if !r.GetStable() || r.GetMaxFrequencyThz() <= 0 || r.GetLatticeType() != "fcc" {
			t.Errorf("stable %v, max %v THz, lattice %q; want stable fcc", r.GetStable(), r.GetMaxFrequencyThz(), r.GetLatticeType())
		}
		labels := map[string]bool{}
		for _, p := range r.GetStandardPoints() {
			labels[p.GetLabel()] = true
		}
		for _, l := range []string{"G", "X", "L"} {
			if !labels[l] {
				t.Errorf("standard points %v lack %s", labels, l)
			}
		}
		if r.GetParameters() != "stability_mesh=8" {
			t.Errorf("parameters %q; want stability_mesh=8", r.GetParameters())
		}
	})
	t.Run("invalid model is an answer, not an error", func(t *testing.T) {
		r, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: inline(&modegridv1.Crystal{
			Lattice: []*modegridv1.Vec3{{X: 1}}, Sites: []*modegridv1.Site{{Label: "A", MassAmu: -2, Frac: []float64{0}}}})})
		if err != nil {
			t.Fatal(err)
		}
		found := false
		for _, v := range r.GetViolations() {
			found = found || v.GetField() == "sites[0].mass_amu"
		}
		if r.GetValid() || !found || r.GetModelHash() != "" {
			t.Errorf("got valid=%v, violations %v, hash %q; want invalid naming sites[0].mass_amu", r.GetValid(), r.GetViolations(), r.GetModelHash())
		}
	})
	t.Run("unstable", func(t *testing.T) {
		r, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: inline(unstableChain())})
		if err != nil {
			t.Fatal(err)
		}
		if r.GetStable() || r.GetMinFrequencyThz() >= 0 {
			t.Errorf("stable %v, min %v THz; want unstable with a negative minimum", r.GetStable(), r.GetMinFrequencyThz())
		}
	})
	t.Run("no model", func(t *testing.T) {
		_, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{})
		if _, ok := badFields(t, err)["model"]; !ok {
			t.Errorf("violations do not name model")
		}
	})
}

func TestDispersion(t *testing.T) {
	ts := startServer(t, Config{MaxPathPoints: 500})
	ctx := testContext(t)
	chain := inline(example(t, "chain"))
	t.Run("chain follows the analytic branch", func(t *testing.T) {
		r, err := ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: chain, Points: 51,
			Path: []*modegridv1.PathPoint{{Label: "G"}, {Label: "X"}}})
		if err != nil {
			t.Fatal(err)
		}
		c := example(t, "chain")
		K, m := c.GetSprings()[0].GetKLong(), c.GetSites()[0].GetMassAmu()
		// ν = 2·sqrt(K/m)·|sin(πq)| · 15.6333042 THz per sqrt(eV/Å²/amu)
		// (Kittel, Introduction to Solid State Physics, ch. 4; the unit
		// factor sqrt(e·10²⁰/m_u)/2π from CODATA 2018 e and m_u).
		prev := -1.0
		for _, s := range r.GetSamples() {
			want := 2 * math.Sqrt(K/m) * math.Abs(math.Sin(math.Pi*s.GetQ().GetQ1())) * 15.6333042
			if got := s.GetFrequencies()[0]; math.Abs(got-want) > 1e-6*want+1e-9 {
				t.Errorf("q=%v: %v THz; want %v", s.GetQ().GetQ1(), got, want)
			}
			if s.GetDistanceInvA() < prev {
				t.Errorf("distance decreases at q=%v", s.GetQ().GetQ1())
			}
			prev = s.GetDistanceInvA()
		}
		if n := len(r.GetSamples()); n < 50 || n > 52 {
			t.Errorf("%d samples; want about 51", n)
		}
	})
	t.Run("labels and coordinates spell the same path", func(t *testing.T) {
		fcc := inline(example(t, "fcc"))
		a, err := ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: fcc,
			Path: []*modegridv1.PathPoint{{Label: "G"}, {Label: "X"}}})
		if err != nil {
			t.Fatal(err)
		}
		check, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: fcc})
		if err != nil {
			t.Fatal(err)
		}
		std := map[string]*modegridv1.QPoint{}
		for _, p := range check.GetStandardPoints() {
			std[p.GetLabel()] = p.GetQ()
		}
		b, err := ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: byHash(a.GetModelHash()), Points: 201,
			Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_THZ, Path: []*modegridv1.PathPoint{{Label: "G", Q: std["G"]}, {Label: "X", Q: std["X"]}}})
		if err != nil {
			t.Fatal(err)
		}
		if a.GetParameters() != b.GetParameters() {
			t.Errorf("parameters differ: %q vs %q", a.GetParameters(), b.GetParameters())
		}
		if n := metric(t, ts.srv.Registry(), "modegrid_cache_hits_total", map[string]string{"kind": kindDispersion, "level": "memory"}); n != 1 {
			t.Errorf("dispersion memory hits %v; want 1", n)
		}
		if !strings.Contains(a.GetParameters(), "points=201") {
			t.Errorf("parameters %q do not resolve the default of 201 points", a.GetParameters())
		}
	})
	t.Run("site weights; connect_branches is follow_modes", func(t *testing.T) {
		di := inline(example(t, "diatomic-chain"))
		path := []*modegridv1.PathPoint{{Label: "G"}, {Label: "X"}}
		follow, err := ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: di, Points: 21, Path: path,
			FollowModes: true, SiteWeights: true})
		if err != nil {
			t.Fatal(err)
		}
		old, err := ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: di, Points: 21, Path: path,
			ConnectBranches: true, SiteWeights: true})
		if err != nil {
			t.Fatal(err)
		}
		if !strings.Contains(follow.GetParameters(), "follow_modes=true;site_weights=true") || old.GetParameters() != follow.GetParameters() {
			t.Errorf("parameters %q and (deprecated field) %q; want equal, with follow_modes=true;site_weights=true", follow.GetParameters(), old.GetParameters())
		}
		sites := len(example(t, "diatomic-chain").GetSites())
		for _, s := range follow.GetSamples() {
			nb := len(s.GetFrequencies())
			if len(s.GetSiteWeights()) != nb*sites {
				t.Fatalf("q=%v: %d site weights; want %d branches × %d sites", s.GetQ().GetQ1(), len(s.GetSiteWeights()), nb, sites)
			}
			for b := range nb {
				sum := 0.0
				for _, w := range s.GetSiteWeights()[b*sites : (b+1)*sites] {
					sum += w
				}
				if math.Abs(sum-1) > 1e-12 {
					t.Errorf("q=%v branch %d: weights sum to %v; want 1", s.GetQ().GetQ1(), b, sum)
				}
			}
		}
		plain, err := ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: di, Points: 21, Path: path})
		if err != nil {
			t.Fatal(err)
		}
		if len(plain.GetSamples()[0].GetSiteWeights()) != 0 || !strings.Contains(plain.GetParameters(), "follow_modes=false;site_weights=false") {
			t.Errorf("unasked: %d weights, parameters %q", len(plain.GetSamples()[0].GetSiteWeights()), plain.GetParameters())
		}
	})
	t.Run("violations", func(t *testing.T) {
		_, err := ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: chain, Points: 1000,
			Path: []*modegridv1.PathPoint{{Label: "G"}, {Label: "Q"}, {Label: "Z", Q: &modegridv1.QPoint{Q1: 0.5, Q2: 0.1}}}})
		fields := badFields(t, err)
		for _, f := range []string{"points", "path[1].label", "path[2].q.q2"} {
			if _, ok := fields[f]; !ok {
				t.Errorf("violations %v do not name %s", fields, f)
			}
		}
		if d := fields["points"]; !strings.Contains(d, "max-path-points=500") {
			t.Errorf("points violation %q does not name the cap", d)
		}
		_, err = ts.api.ComputeDispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: chain, Path: []*modegridv1.PathPoint{{Label: "G"}}})
		if _, ok := badFields(t, err)["path"]; !ok {
			t.Error("a one-corner path is not refused naming path")
		}
	})
}

// unstableChain is an invented chain whose only spring is negative: every
// mode but the acoustic one at Γ is imaginary.
func unstableChain() *modegridv1.Crystal {
	return &modegridv1.Crystal{
		Name: "unstable chain", Lattice: []*modegridv1.Vec3{{X: 2.5}}, Polarizations: 1,
		Sites:   []*modegridv1.Site{{Label: "A", MassAmu: 40, Frac: []float64{0}}},
		Springs: []*modegridv1.Spring{{FromSite: 0, ToSite: 0, Cell: []int32{1}, KLong: -1.5}},
	}
}
