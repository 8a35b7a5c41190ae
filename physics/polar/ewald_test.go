// Tests of the dipole–dipole Ewald sum: independence of the Ewald
// parameter, Hermiticity, the acoustic sum rule, derivatives, and the
// agreement of grids with single points.

package polar_test

import (
	"context"
	"errors"
	"math"
	"math/cmplx"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/polar"
)

// probes are wavevectors of every kind: generic, a zone-boundary point,
// one near Γ, one beyond the first zone, and Γ itself.
var probes = [][3]float64{
	{0.13, 0.27, -0.31},
	{0.5, 0, 0.5},
	{1e-3, -2e-3, 0.5e-3},
	{1.37, -2.21, 0.4},
	{0, 0, 0},
}

// TestEwaldParameterIndependence: the Ewald sum is an identity for every
// Λ (Gonze & Lee, Phys. Rev. B 55, 10355 (1997)): D(q), its
// frequencies and its derivative must agree between three parameters
// spanning a factor 4 (real-space terms from about 200 to 10 000 per
// pair) to 1e-8 relative to the largest element; measured a few 1e-14.
func TestEwaldParameterIndependence(t *testing.T) {
	for _, tc := range []struct {
		name string
		c    *physics.Crystal
	}{
		{"rock-salt-like", rockSalt(1.2, iso(3))},
		{"triclinic, anisotropic", lowSymmetry()},
	} {
		t.Run(tc.name, func(t *testing.T) {
			def := term(t, compile(t, tc.c, 0)).LambdaInvA()
			var ms []*physics.Model
			for _, f := range []float64{0.5, 1, 2} {
				ms = append(ms, compile(t, tc.c, f*def))
			}
			for _, q := range probes {
				ref := ms[0].DynamicalMatrix(q, nil)
				scale := maxAbs(ref)
				fRef, _ := ms[0].ModesToward(q, [3]float64{1, 2, 3})
				for k, m := range ms[1:] {
					if d := maxDiff(m.DynamicalMatrix(q, nil), ref) / scale; d > 1e-8 {
						t.Errorf("q=%v: D at Λ #%d differs by %.3g of max|D| from Λ #0; want ≤ 1e-8", q, k+1, d)
					}
					f, _ := m.ModesToward(q, [3]float64{1, 2, 3})
					for b := range f {
						if !relClose(f[b], fRef[b], 1e-8, fRef[len(fRef)-1]) {
							t.Errorf("q=%v branch %d: %.12g THz at Λ #%d, %.12g at Λ #0", q, b, f[b], k+1, fRef[b])
						}
					}
				}
				if q == ([3]float64{}) {
					continue
				}
				gRef := ms[0].DynamicalMatrixGrad(q)
				for k, m := range ms[1:] {
					g := m.DynamicalMatrixGrad(q)
					for a := range g {
						if d := maxDiff(g[a], gRef[a]) / maxAbs(gRef[a]); d > 1e-8 {
							t.Errorf("q=%v: ∂D/∂q_%d at Λ #%d differs by %.3g relative; want ≤ 1e-8", q, a, k+1, d)
						}
					}
				}
			}
		})
	}
}

// TestOpticalAwayFromGammaIndependentOfLambda: the optical frequencies of
// the rock-salt-like crystal along Γ–X (Γ excluded) do not depend on the
// Ewald parameter to 1e-8 relative.
func TestOpticalAwayFromGammaIndependentOfLambda(t *testing.T) {
	c := rockSalt(1.1, iso(2.5))
	def := term(t, compile(t, c, 0)).LambdaInvA()
	a, b := compile(t, c, 0.6*def), compile(t, c, 1.7*def)
	for i := 1; i <= 10; i++ {
		q := [3]float64{0, 0.05 * float64(i), 0.05 * float64(i)}
		fa, fb := a.FrequenciesTHz(q), b.FrequenciesTHz(q)
		for k := 3; k < 6; k++ {
			if !relClose(fb[k], fa[k], 1e-8, 0) {
				t.Errorf("q=%v optical branch %d: %.12g THz at 1.7Λ, %.12g at 0.6Λ", q, k, fb[k], fa[k])
			}
		}
	}
}

// TestHermitianAndTimeReversal: D(q) is Hermitian and D(−q) = D(q)*, as
// for any real force constants (physics/doc.go, Invariants).
func TestHermitianAndTimeReversal(t *testing.T) {
	m := compile(t, lowSymmetry(), 0)
	n := m.ModeCount()
	for _, q := range probes {
		d := m.DynamicalMatrix(q, nil)
		dm := m.DynamicalMatrix([3]float64{-q[0], -q[1], -q[2]}, nil)
		scale := maxAbs(d)
		for r := 0; r < n; r++ {
			for c := 0; c < n; c++ {
				if e := cmplx.Abs(dm[r*n+c] - cmplx.Conj(d[r*n+c])); e > 1e-12*scale {
					t.Fatalf("q=%v: D(−q)[%d,%d] = %v, conj D(q) = %v", q, r, c, dm[r*n+c], cmplx.Conj(d[r*n+c]))
				}
			}
		}
	}
}

// TestAcousticSumRule: with neutral charges the acoustic modes at Γ are
// zero (to the engine's tolerance) whatever the direction of approach:
// the term's sum-rule correction removes the force of a rigid
// translation, and Σ Z* = 0 removes the non-analytic part's (Gonze & Lee
// 1997).
func TestAcousticSumRule(t *testing.T) {
	for _, tc := range []struct {
		name string
		c    *physics.Crystal
	}{
		{"rock-salt-like", rockSalt(1.2, iso(3))},
		{"triclinic", lowSymmetry()},
	} {
		m := compile(t, tc.c, 0)
		t.Logf("%s: antisymmetric part of the correction %.3g eV/Å²", tc.name, term(t, m).Asymmetry())
		for _, dir := range [][3]float64{{}, {1, 0, 0}, {0.3, -0.7, 0.2}} {
			// The triclinic model has an unstable optical mode at Γ (its
			// springs are weak against the dipoles): count the zeros.
			f, _ := m.ModesToward([3]float64{}, dir)
			zeros := 0
			for _, x := range f {
				if x == 0 {
					zeros++
				}
			}
			if zeros != 3 {
				t.Errorf("%s, dir %v: %d zero modes at Γ, %v THz; want the 3 acoustic ones (|ν| within the tolerance %.3g THz made 0)", tc.name, dir, zeros, f, m.EigenTolTHz())
			}
		}
	}
}

// TestGradientMatchesDifferences: the analytic ∂D/∂q of the dipole–dipole
// term agrees with central differences of D(q) (step 1e-5 Å⁻¹, error
// O(h²) ≈ 1e-10 relative) to 1e-6 relative.
func TestGradientMatchesDifferences(t *testing.T) {
	m := compile(t, lowSymmetry(), 0)
	q := [3]float64{0.21, -0.17, 0.33}
	g := m.DynamicalMatrixGrad(q)
	const h = 1e-5
	lat := m.Lattice()
	for a := 0; a < 3; a++ {
		var dq [3]float64 // fractional step of a Cartesian step h along a
		for k := 0; k < 3; k++ {
			dq[k] = h * lat[k][a] / (2 * math.Pi)
		}
		qp := [3]float64{q[0] + dq[0], q[1] + dq[1], q[2] + dq[2]}
		qm := [3]float64{q[0] - dq[0], q[1] - dq[1], q[2] - dq[2]}
		dp, dmn := m.DynamicalMatrix(qp, nil), m.DynamicalMatrix(qm, nil)
		fd := make([]complex128, len(dp))
		for i := range fd {
			fd[i] = (dp[i] - dmn[i]) / complex(2*h, 0)
		}
		if d := maxDiff(fd, g[a]) / maxAbs(g[a]); d > 1e-6 {
			t.Errorf("∂D/∂q_%d: differs from central differences by %.3g relative; want ≤ 1e-6", a, d)
		}
	}
}

// TestGridMatchesPoints: a grid's frequencies away from Γ are those of
// single points (the term is added wherever D(q) is assembled), and its Γ
// point takes the analytic part only (no LO–TO splitting).
func TestGridMatchesPoints(t *testing.T) {
	m := compile(t, rockSalt(1.2, iso(3)), 0)
	g, err := m.GridModes(context.Background(), mesh.GridSpec{Mesh: [3]int{4, 4, 4}}, physics.GridOptions{})
	if err != nil {
		t.Fatal(err)
	}
	n := g.NModes
	for i, p := range g.Points {
		want := m.FrequenciesTHz(p.Q)
		for k := 0; k < n; k++ {
			if !relClose(g.FreqTHz[i*n+k], want[k], 1e-9, want[n-1]) {
				t.Fatalf("q=%v branch %d: grid %.12g THz, point %.12g", p.Q, k, g.FreqTHz[i*n+k], want[k])
			}
		}
		if p.Q == ([3]float64{}) && !relClose(g.FreqTHz[i*n+5], g.FreqTHz[i*n+3], 1e-12, 0) {
			t.Errorf("grid Γ: optical %.9g, %.9g THz differ; the analytic part alone leaves them degenerate", g.FreqTHz[i*n+3], g.FreqTHz[i*n+5])
		}
	}
}

// TestZeroChargesNoSplitting: with zero charges the dipole–dipole term
// vanishes: no LO–TO splitting, and the frequencies everywhere are those
// of the same springs without polar data (to rounding).
func TestZeroChargesNoSplitting(t *testing.T) {
	c := rockSalt(0, iso(4))
	m := compile(t, c, 0)
	bare := *c
	bare.EpsilonInf = nil
	bare.Sites = append([]physics.Site(nil), c.Sites...)
	for i := range bare.Sites {
		bare.Sites[i].BornCharge = nil
	}
	plain, err := physics.Compile(context.Background(), &bare, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	for _, dir := range [][3]float64{{1, 0, 0}, {1, 1, 1}} {
		f, _ := m.ModesToward([3]float64{}, dir)
		if f[5] != f[3] {
			t.Errorf("zero charges, Γ along %v: optical %.12g and %.12g THz differ", dir, f[3], f[5])
		}
	}
	for _, q := range probes {
		a, b := m.FrequenciesTHz(q), plain.FrequenciesTHz(q)
		for k := range a {
			if !relClose(a[k], b[k], 1e-12, b[len(b)-1]) {
				t.Errorf("q=%v branch %d: %.15g THz with zero charges, %.15g without polar data", q, k, a[k], b[k])
			}
		}
	}
}

// TestSoundVelocitiesWithZeroCharges: a polar model's sound velocities
// (extrapolated from small wavevectors) agree with the long-wave method's
// for the same springs when the charges vanish, to 1e-7 relative.
func TestSoundVelocitiesWithZeroCharges(t *testing.T) {
	c := rockSalt(0, iso(4))
	m := compile(t, c, 0)
	bare := *c
	bare.EpsilonInf = nil
	bare.Sites = append([]physics.Site(nil), c.Sites...)
	for i := range bare.Sites {
		bare.Sites[i].BornCharge = nil
	}
	plain, err := physics.Compile(context.Background(), &bare, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	for _, dir := range [][3]float64{{1, 0, 0}, {1, 1, 0}, {0.2, 0.5, 0.9}} {
		a, err := m.SoundVelocities(context.Background(), dir)
		if err != nil {
			t.Fatal(err)
		}
		b, err := plain.SoundVelocities(context.Background(), dir)
		if err != nil {
			t.Fatal(err)
		}
		for s := range b {
			if !relClose(a[s], b[s], 1e-7, 0) {
				t.Errorf("dir %v branch %d: %.10g km/s (polar route), %.10g (long waves)", dir, s, a[s], b[s])
			}
		}
	}
}

// TestBuildRefusesBadParameter: a negative Ewald parameter is an error.
func TestBuildRefusesBadParameter(t *testing.T) {
	_, err := physics.Compile(context.Background(), rockSalt(1, iso(3)), physics.Options{LongRange: polar.BuilderWith(polar.Params{LambdaInvA: -1})})
	if err == nil {
		t.Fatal("Λ = −1 compiled")
	}
}

// TestEstimateMatchesTerm: the pre-compile size estimate counts what the
// built term holds.
func TestEstimateMatchesTerm(t *testing.T) {
	for _, c := range []*physics.Crystal{rockSalt(1, iso(3)), lowSymmetry()} {
		got, err := polar.Estimate(c)
		if err != nil {
			t.Fatal(err)
		}
		want := term(t, compile(t, c, 0)).TermSizes()
		if got != want {
			t.Errorf("Estimate %+v; the term has %+v", got, want)
		}
	}
}

// TestSkewedCellRefused: a cell so skewed that its Ewald sums would test
// more than MaxCandidates lattice points is refused on "lattice" (a
// validation error), not set up for minutes.
func TestSkewedCellRefused(t *testing.T) {
	c := rockSalt(1, iso(3))
	c.Shells = nil
	c.Lattice = [][3]float64{{4, 0, 0}, {4, 0.001, 0}, {0, 0, 4}}
	_, err := physics.Compile(context.Background(), c, physics.Options{LongRange: polar.Builder()})
	var ve *physics.ValidationError
	if !errors.As(err, &ve) || ve.Violations[0].Field != "lattice" {
		t.Fatalf("skewed polar cell: %v; want a validation error on lattice", err)
	}
	if _, err := polar.Estimate(c); !errors.As(err, &ve) {
		t.Errorf("Estimate: %v; want the same refusal", err)
	}
}

// TestBatchedGridAddsDipoleTerm: a polar model with springs over many
// cells assembles its grid's dynamical matrices in batches (dynbatch.go);
// the dipole–dipole term must be added to those too, so the grid equals
// the point-by-point frequencies (derived: both are the same D(q)). Every
// point is solved (NoSymmetry): the far springs of this model break the
// cubic group at 1e-3 of the largest constant, within the symmetry
// search's force-constant tolerance, so a reduced grid would differ from
// the points by that much whatever the assembly.
func TestBatchedGridAddsDipoleTerm(t *testing.T) {
	c := testmodels.FarSprings(rockSalt(1.2, iso(3)), 3, 1e9, 2, 1.5)
	m := compile(t, c, 0)
	if m.StackBytes() == 0 {
		t.Fatal("the model does not assemble in batches: the test would not reach the batched path")
	}
	g, err := m.GridModes(context.Background(), mesh.GridSpec{Mesh: [3]int{4, 4, 4}}, physics.GridOptions{NoSymmetry: true})
	if err != nil {
		t.Fatal(err)
	}
	n := g.NModes
	for i, p := range g.Points {
		want := m.FrequenciesTHz(p.Q)
		for k := 0; k < n; k++ {
			if !relClose(g.FreqTHz[i*n+k], want[k], 1e-9, want[n-1]) {
				t.Fatalf("q=%v branch %d: batched grid %.12g THz, point %.12g", p.Q, k, g.FreqTHz[i*n+k], want[k])
			}
		}
	}
}
