package fit

import (
	"context"
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// rocksaltPaths are the four parameters fitted on the rock-salt-like
// example: the P–Q shell's two constants and the P–P and Q–Q shells'
// longitudinal ones.
var rocksaltPaths = []string{"shells[0].k_long", "shells[0].k_trans", "shells[1].k_long", "shells[2].k_long"}

// rocksaltQ are seven wavevectors of the rock-salt-like example (fcc
// lattice: X = (½, 0, ½), L = (½, ½, ½), K = (⅜, ⅜, ¾) and points between
// them and Γ, one general point); with its 6 branches, 42 frequencies.
var rocksaltQ = [][3]float64{{0.1, 0, 0.1}, {0.25, 0, 0.25}, {0.5, 0, 0.5}, {0.2, 0.2, 0.2}, {0.5, 0.5, 0.5}, {0.375, 0.375, 0.75}, {0.15, 0.05, 0.3}}

// typicalProblem is the fit DEVELOPERS.md times: the rock-salt-like
// example's four shell constants started 10–30 % off, against 40 of its
// own frequencies (unlabelled, σ = 0.05 THz + 1 %).
func typicalProblem(t testing.TB) (*Problem, *physics.Crystal) {
	truth := testmodels.Load(t, "rocksalt-like")
	data := dispersion(compile(t, truth), rocksaltQ, false, func(nu float64) float64 { return 0.05 + 0.01*nu })[:40]
	start := cloneForces(truth)
	for i, f := range []float64{1.3, 0.7, 1.2, 0.9} {
		setPath(t, start, rocksaltPaths[i], f*getPath(t, truth, rocksaltPaths[i]))
	}
	return &Problem{Crystal: start, Free: free(rocksaltPaths...), Frequencies: data}, truth
}

// TestRecoversTwoSiteCrystal: exact frequencies of the rock-salt-like
// example (two sites, 3D) give back its four shell constants to 1e-8
// from a start 10–30 % off, every point assigned by the fit.
func TestRecoversTwoSiteCrystal(t *testing.T) {
	p, truth := typicalProblem(t)
	res := fitOK(t, p)
	if !res.Converged {
		t.Errorf("not converged: %s", res.Stop)
	}
	for i, pr := range res.Params {
		want := getPath(t, truth, rocksaltPaths[i])
		if e := relErr(pr.Value, want); e > 1e-8 {
			t.Errorf("%s = %.12g, want %g (relative error %.2g > 1e-8)", pr.Path, pr.Value, want, e)
		}
		if !pr.Determined {
			t.Errorf("%s reported not determined", pr.Path)
		}
	}
	if res.Data != 40 || res.Rank != 4 || res.DOF != 36 {
		t.Errorf("data %d, rank %d, dof %d; want 40, 4, 36", res.Data, res.Rank, res.DOF)
	}
	if len(res.Undetermined) != 0 {
		t.Errorf("undetermined groups %+v; want none", res.Undetermined)
	}
	// The fitted model is the truth to the same accuracy: its hash differs
	// only by the last digits, so compare frequencies.
	want := compile(t, truth).FrequenciesTHz([3]float64{0.3, 0.1, 0.2})
	got := res.Model.FrequenciesTHz([3]float64{0.3, 0.1, 0.2})
	for b := range want {
		if e := relErr(got[b], want[b]); e > 1e-8 {
			t.Errorf("fitted model at (0.3, 0.1, 0.2), branch %d: %v THz, want %v", b+1, got[b], want[b])
		}
	}
}

// TestRecoversChain: the two-site chain (1D, one polarization) with its
// two springs made unequal: labelled frequencies along the zone give back
// both constants to 1e-8.
func TestRecoversChain(t *testing.T) {
	truth := testmodels.Load(t, "diatomic-chain")
	truth.Springs[1].KLong = 3.0 // the example has 2 and 2: make the two bonds differ
	var qs [][3]float64
	for i := 1; i <= 10; i++ {
		qs = append(qs, [3]float64{0.05 * float64(i), 0, 0})
	}
	data := dispersion(compile(t, truth), qs, true, func(float64) float64 { return 0.02 })
	start := cloneForces(truth)
	start.Springs[0].KLong, start.Springs[1].KLong = 2.3, 2.7
	res := fitOK(t, &Problem{Crystal: start, Free: free("springs[0].k_long", "springs[1].k_long"), Frequencies: data})
	for i, want := range []float64{2.0, 3.0} {
		if e := relErr(res.Params[i].Value, want); e > 1e-8 {
			t.Errorf("%s = %.12g, want %g (relative error %.2g)", res.Params[i].Path, res.Params[i].Value, want, e)
		}
	}
	// The chain's spectrum is symmetric in the two springs (exchanging
	// them is a relabelling of the bonds, Ashcroft & Mermin ch. 22): the
	// fit finds the one the start was nearer to.
	if res.Params[0].Value > res.Params[1].Value {
		t.Errorf("the fit swapped the springs: %v, %v", res.Params[0].Value, res.Params[1].Value)
	}
}

// TestSumOnlyNotDetermined: a spring and a neighbour shell on the same
// bond of the monatomic chain add up (physics/doc.go: springs, shells and
// blocks on the same pair add), so only their sum is in the data: both are
// reported not determined, k₁ + k₂ determined at the true total, k₁ − k₂
// flat.
func TestSumOnlyNotDetermined(t *testing.T) {
	truth := testmodels.Chain() // K = 1.5 eV/Å² on the nearest-neighbour bond
	truth.Shells = []physics.Shell{{FromLabel: "A", ToLabel: "A", Shell: 1}}
	truth.Springs[0].KLong, truth.Shells[0].KLong = 1.0, 0.5
	var qs [][3]float64
	for i := 1; i <= 8; i++ {
		qs = append(qs, [3]float64{0.06 * float64(i), 0, 0})
	}
	data := dispersion(compile(t, truth), qs, true, func(float64) float64 { return 0.01 })
	start := cloneForces(truth)
	start.Springs[0].KLong, start.Shells[0].KLong = 0.7, 0.4
	res := fitOK(t, &Problem{Crystal: start, Free: free("springs[0].k_long", "shells[0].k_long"), Frequencies: data})
	for _, pr := range res.Params {
		if pr.Determined || pr.StdErr != 0 {
			t.Errorf("%s: determined %v, error %v; want not determined, no error", pr.Path, pr.Determined, pr.StdErr)
		}
	}
	if res.Rank != 1 || len(res.Undetermined) != 1 {
		t.Fatalf("rank %d, groups %+v; want rank 1 and one group", res.Rank, res.Undetermined)
	}
	u := res.Undetermined[0]
	if len(u.Params) != 2 || len(u.Determined) != 1 || len(u.Flat) != 1 {
		t.Fatalf("group %+v; want two parameters, one determined and one flat combination", u)
	}
	d, f := u.Determined[0], u.Flat[0]
	if relErr(d.Coeffs[0], 1) > 1e-9 || relErr(d.Coeffs[1], 1) > 1e-9 || relErr(d.Value, 1.5) > 1e-9 {
		t.Errorf("determined %+v; want 1·k₁ + 1·k₂ = 1.5", d)
	}
	if !(d.StdErrUnscaled > 0) {
		t.Errorf("determined combination without an error: %+v", d)
	}
	if relErr(f.Coeffs[0], 1) > 1e-9 || relErr(f.Coeffs[1], -1) > 1e-9 {
		t.Errorf("flat direction %v; want (1, −1)", f.Coeffs)
	}
}

// TestBoundsAndTies: a tie recovers two constants held in a known ratio,
// and a bound below the truth holds its parameter there, outside the
// covariance.
func TestBoundsAndTies(t *testing.T) {
	truth := testmodels.Load(t, "rocksalt-like")
	truth.Shells[2].KLong = 0.5 * truth.Shells[1].KLong // Q–Q = ½ P–P
	data := dispersion(compile(t, truth), rocksaltQ, false, func(nu float64) float64 { return 0.05 })
	start := cloneForces(truth)
	start.Shells[0].KLong, start.Shells[1].KLong = 25, 4
	p := &Problem{Crystal: start, Free: free("shells[0].k_long", "shells[1].k_long"), Frequencies: data,
		Ties: []Tie{{Path: "shells[2].k_long", To: "shells[1].k_long", Ratio: 0.5}}}
	res := fitOK(t, p)
	if e := relErr(res.Params[1].Value, truth.Shells[1].KLong); e > 1e-8 {
		t.Errorf("shells[1].k_long = %v, want %v", res.Params[1].Value, truth.Shells[1].KLong)
	}
	if len(res.Ties) != 1 || relErr(res.Ties[0].Value, truth.Shells[2].KLong) > 1e-8 || res.Crystal.Shells[2].KLong != res.Ties[0].Value {
		t.Errorf("ties %+v (fitted crystal %v); want shells[2].k_long = %v", res.Ties, res.Crystal.Shells[2].KLong, truth.Shells[2].KLong)
	}

	// An upper bound below the truth of shells[0].k_long (20 N/m).
	p.Free[0] = Free{Path: "shells[0].k_long", HasUpper: true, Upper: 18}
	start.Shells[0].KLong = 15
	res = fitOK(t, p)
	pr := res.Params[0]
	if pr.AtBound != "upper" || pr.Value != 18 || pr.Determined || pr.StdErr != 0 {
		t.Errorf("bounded parameter %+v; want held at its upper bound 18, no error", pr)
	}
	if !res.Params[1].Determined || res.Rank != 1 {
		t.Errorf("the other parameter %+v (rank %d); want determined, rank 1", res.Params[1], res.Rank)
	}
}

// TestPolarizationHint: at q along Γ–X of the rock-salt-like example a
// longitudinal hint picks the longitudinal acoustic branch for a datum
// whose value lies nearer a transverse one, and a transverse hint a
// transverse branch.
func TestPolarizationHint(t *testing.T) {
	c := testmodels.Load(t, "rocksalt-like")
	m := compile(t, c)
	q := [3]float64{0.3, 0, 0.3}
	nu, vecs := m.ModesAt(q)
	long := longitudinalFractions(m, q, vecs)
	la := -1
	for b := 0; b < 3; b++ {
		if long[b] > 0.99 {
			la = b
		}
	}
	if la < 0 {
		t.Fatalf("no longitudinal acoustic branch along Γ–X: fractions %v", long)
	}
	ta := 0 // a transverse acoustic branch (fraction 0 along this high-symmetry line)
	if la == 0 {
		ta = 1
	}
	if long[ta] > 1e-9 {
		t.Fatalf("branch %d has longitudinal fraction %v; want 0 along Γ–X", ta+1, long[ta])
	}
	obs := nu[ta] + 0.1*(nu[la]-nu[ta]) // nearer the transverse branch
	got := assign([]item{{obs: obs, sigma: 1, pol: Longitudinal}}, nu, long, nil)[0]
	if got != la {
		t.Errorf("longitudinal hint at %v THz went to branch %d (%v THz); want the LA branch %d", obs, got+1, nu[got], la+1)
	}
	got = assign([]item{{obs: nu[la], sigma: 1, pol: Transverse}}, nu, long, nil)[0]
	if long[got] > 0.5 || got > 2 {
		t.Errorf("transverse hint went to branch %d (fraction %v)", got+1, long[got])
	}
	// Without a hint, two data at one q take two different branches.
	two := assign([]item{{obs: nu[4], sigma: 1}, {obs: nu[4] + 1e-3, sigma: 1}}, nu, nil, nil)
	if two[0] == two[1] {
		t.Errorf("two unlabelled data took the same branch %d", two[0]+1)
	}
}

// TestCancelled: a cancelled context ends the fit with its error.
func TestCancelled(t *testing.T) {
	p, _ := typicalProblem(t)
	ctx, cancel := context.WithCancel(testmodels.Ctx(t))
	defer cancel()
	calls := 0
	p.Progress = func(Progress) {
		calls++
		if calls == 2 {
			cancel()
		}
	}
	if _, err := Fit(ctx, p); err == nil || err != ctx.Err() {
		t.Errorf("Fit after cancel: %v; want %v", err, ctx.Err())
	}
}

// TestFixtureStable: the derivative fixture has no imaginary mode on a
// grid and none of its test wavevectors are degenerate.
func TestFixtureStable(t *testing.T) {
	m := compile(t, fixture())
	_, _, stable, err := m.Stability(testmodels.Ctx(t), 6)
	if err != nil || !stable {
		t.Fatalf("fixture stability: stable %v, %v", stable, err)
	}
	for _, q := range fixtureQ {
		nu := m.FrequenciesTHz(q)
		for b := 1; b < len(nu); b++ {
			if nu[b]-nu[b-1] < 1e-3 {
				t.Errorf("fixture at %v: branches %d and %d within %v THz", q, b, b+1, nu[b]-nu[b-1])
			}
		}
	}
}

// TestExtremeSigmaStaysFinite: uncertainties at the ends of the accepted
// range (a huge one was found by fuzzing the service) give finite numbers
// or report the parameter not determined, never NaN or Inf.
func TestExtremeSigmaStaysFinite(t *testing.T) {
	for _, sigma := range []float64{MaxDatum, 1 / MaxDatum, 1e-20} {
		p := &Problem{Crystal: testmodels.Chain(), Free: free("springs[0].k_long"),
			Frequencies: []Frequency{{Q: [3]float64{0.2}, FreqTHz: 3, SigmaTHz: sigma}}}
		res, err := Fit(testmodels.Ctx(t), p)
		if err != nil {
			t.Fatalf("σ = %g: %v", sigma, err)
		}
		pr := res.Params[0]
		for _, x := range []float64{pr.Value, pr.StdErr, pr.StdErrUnscaled, res.ChiSquare, res.ReducedChiSquare, res.Correlation[0]} {
			if math.IsNaN(x) || math.IsInf(x, 0) {
				t.Errorf("σ = %g: a number that is not finite in %+v (χ² %v)", sigma, pr, res.ChiSquare)
			}
		}
	}
}
