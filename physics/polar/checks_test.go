// Physics checks of the polar model against closed forms: the
// Lyddane–Sachs–Teller relation, the rigid-ion LO–TO splitting, the
// direction dependence in a uniaxial crystal, and the infrared response.

package polar_test

import (
	"context"
	"math"
	"math/cmplx"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/polar"
)

// gammaTOLO returns the highest optical frequency at Γ without direction
// (the triply degenerate TO of a cubic two-site crystal) and along dir
// (its LO), THz.
func gammaTOLO(m *physics.Model, dir [3]float64) (to, lo float64) {
	fa := m.FrequenciesTHz([3]float64{})
	fl, _ := m.ModesToward([3]float64{}, dir)
	return fa[len(fa)-1], fl[len(fl)-1]
}

// TestLyddaneSachsTeller: for a cubic crystal with one infrared-active
// mode, ω_LO²/ω_TO² = ε₀/ε∞ (Lyddane, Sachs & Teller, Phys. Rev. 59, 673
// (1941)), with ε₀ from the oscillator sum of the infrared response, to
// 1e-8 — in every direction of approach (the crystal is cubic).
func TestLyddaneSachsTeller(t *testing.T) {
	for _, tc := range []struct{ z, eps float64 }{{1.2, 3}, {0.7, 5.5}, {2.1, 2}} {
		m := compile(t, rockSalt(tc.z, iso(tc.eps)), 0)
		for _, dir := range [][3]float64{{1, 0, 0}, {1, 1, 1}, {0.2, -0.5, 0.9}} {
			to, lo := gammaTOLO(m, dir)
			ir, err := polar.Infrared(context.Background(), m, polar.IROptions{Direction: dir})
			if err != nil {
				t.Fatal(err)
			}
			got, want := lo*lo/(to*to), ir.EpsStaticDir/ir.EpsInfDir
			if !relClose(got, want, 1e-8, 0) {
				t.Errorf("Z=%v ε∞=%v dir %v: ω_LO²/ω_TO² = %.12g, ε₀/ε∞ = %.12g; want equal to 1e-8", tc.z, tc.eps, dir, got, want)
			}
			t.Logf("Z=%v ε∞=%v dir %v: ω_LO²/ω_TO² = %.12g, ε₀/ε∞ = %.12g (rel. diff %.2g)", tc.z, tc.eps, dir, got, want, math.Abs(got-want)/want)
		}
	}
}

// TestRigidIonSplitting: the LO–TO splitting of a rigid-ion cubic
// two-site crystal is ω_LO² − ω_TO² = Z²e²/(ε₀ ε∞ Ω μ) in SI units
// (M. Born & K. Huang, Dynamical Theory of Crystal Lattices, Oxford
// 1954, ch. II §8 and ch. V), μ the reduced mass, Ω the cell volume, ε₀
// the vacuum permittivity (CODATA 2018): to 1e-8.
func TestRigidIonSplitting(t *testing.T) {
	const m1, m2 = 25.0, 80.0 // the site masses of rockSalt, amu
	const omegaA3 = 2 * 2.8 * 2.8 * 2.8
	for _, tc := range []struct{ z, eps float64 }{{1.2, 3}, {0.7, 5.5}, {2.1, 2}} {
		m := compile(t, rockSalt(tc.z, iso(tc.eps)), 0)
		if v := m.CellVolumeA3(); math.Abs(v-omegaA3) > 1e-12 {
			t.Fatalf("cell volume %v Å³; want 2·2.8³", v)
		}
		to, lo := gammaTOLO(m, [3]float64{0, 0, 1})
		got := sqTHzToSI(lo) - sqTHzToSI(to)
		mu := m1 * m2 / (m1 + m2) * physics.AtomicMassKg
		q := tc.z * physics.ElementaryChargeC
		want := q * q / (physics.VacuumPermittivityFPerM * tc.eps * omegaA3 * 1e-30 * mu)
		if !relClose(got, want, 1e-8, 0) {
			t.Errorf("Z=%v ε∞=%v: ω_LO² − ω_TO² = %.12g rad²/s²; closed form %.12g", tc.z, tc.eps, got, want)
		}
		t.Logf("Z=%v ε∞=%v: ν_TO %.9f THz, ν_LO %.9f THz, Δω² %.12g rad²/s², closed form %.12g (rel. diff %.2g)", tc.z, tc.eps, to, lo, got, want, math.Abs(got-want)/want)
	}
}

// TestUniaxialDirection: a cubic two-site crystal with a uniaxial ε∞ =
// diag(ε⊥, ε⊥, ε∥). Derivation (here): at Γ along the unit vector u the
// optical modes are the eigenvalues of A + s·u uᵀ/(u·ε∞·u) in the basis of
// the relative displacements e_α = (√(μ/m₁) x̂_α, −√(μ/m₂) x̂_α), where A
// is the analytic optical block (diagonal, diag(a⊥, a⊥, a∥), by the
// tetragonal symmetry the axis leaves) and s = (4π e²/4πε₀) Z²/(Ω μ) —
// the non-analytic term (4π/Ω)(u·Z_i)(u·Z_j)/(u·ε∞·u)/√(m_i m_j) projected
// on e_α gives Z u_α/√μ from each side. For u = (sin θ, 0, cos θ):
// a⊥ (polarised along y) and the eigenvalues of
//
//	[ a⊥ + s sin²θ/D    s sinθ cosθ/D ]
//	[ s sinθ cosθ/D     a∥ + s cos²θ/D ],   D = ε⊥ sin²θ + ε∥ cos²θ.
//
// The model's frequencies must match to 1e-8 at six angles.
func TestUniaxialDirection(t *testing.T) {
	const z, ep, ez = 1.3, 2.5, 4.0
	const m1, m2 = 25.0, 80.0
	m := compile(t, rockSalt(z, diag(ep, ep, ez)), 0)
	mu := m1 * m2 / (m1 + m2)
	s := 4 * math.Pi * physics.CoulombEVA * z * z / (m.CellVolumeA3() * mu) // eV/Å²/amu
	// A from the analytic D(Γ) projected on the relative displacements.
	d := m.DynamicalMatrix([3]float64{}, nil)
	n := m.ModeCount()
	e := func(al int) []float64 {
		v := make([]float64, n)
		v[al] = math.Sqrt(mu / m1)
		v[3+al] = -math.Sqrt(mu / m2)
		return v
	}
	var a [3][3]float64
	for x := 0; x < 3; x++ {
		for y := 0; y < 3; y++ {
			ex, ey := e(x), e(y)
			for r := 0; r < n; r++ {
				for c := 0; c < n; c++ {
					a[x][y] += ex[r] * real(d[r*n+c]) * ey[c]
				}
			}
		}
	}
	aperp, apar := a[0][0], a[2][2]
	if math.Abs(a[1][1]-aperp) > 1e-12*aperp || math.Abs(a[0][1])+math.Abs(a[0][2])+math.Abs(a[1][2]) > 1e-12*aperp {
		t.Fatalf("analytic optical block not diag(a⊥, a⊥, a∥): %v", a)
	}
	for _, deg := range []float64{0, 15, 30, 45, 70, 90} {
		th := deg * math.Pi / 180
		sn, cs := math.Sin(th), math.Cos(th)
		dd := ep*sn*sn + ez*cs*cs
		p, q, r := aperp+s*sn*sn/dd, s*sn*cs/dd, apar+s*cs*cs/dd
		mean, half := (p+r)/2, math.Hypot((p-r)/2, q)
		want := []float64{aperp, mean - half, mean + half}
		f, _ := m.ModesToward([3]float64{}, [3]float64{sn, 0, cs})
		got := f[3:]
		sortFloats(want)
		for k := range want {
			w := math.Sqrt(want[k]) * physics.NuUnitTHz
			if !relClose(got[k], w, 1e-8, 0) {
				t.Errorf("θ=%v°: optical mode %d at %.12g THz; hand derivation %.12g", deg, k, got[k], w)
			}
		}
	}
}

func sortFloats(v []float64) {
	for i := 1; i < len(v); i++ {
		for j := i; j > 0 && v[j] < v[j-1]; j-- {
			v[j], v[j-1] = v[j-1], v[j]
		}
	}
}

// fluorite is an invented three-site crystal of the fluorite structure:
// fcc lattice, a site of charge 2z at 0 and two of −z at ±¼(1,1,1). At Γ
// its optical modes are an infrared-active triplet (the two outer sites
// against the middle one) and a silent triplet (the outer sites against
// each other, which carries no dipole) — group theory of the fluorite
// structure, e.g. Born & Huang 1954 ch. II; here it follows from the
// displacement patterns alone.
func fluorite(z float64) *physics.Crystal {
	const a = 2.75
	return &physics.Crystal{
		Lattice: [][3]float64{{0, a, a}, {a, 0, a}, {a, a, 0}},
		Sites: []physics.Site{
			{Label: "M", MassAmu: 40, Frac: []float64{0, 0, 0}, BornCharge: iso(2 * z)},
			{Label: "X", MassAmu: 19, Frac: []float64{0.25, 0.25, 0.25}, BornCharge: iso(-z)},
			{Label: "X", MassAmu: 19, Frac: []float64{0.75, 0.75, 0.75}, BornCharge: iso(-z)},
		},
		Shells: []physics.Shell{
			{FromLabel: "M", ToLabel: "X", Shell: 1, KLong: 4, KTrans: 0.5},
			{FromLabel: "X", ToLabel: "X", Shell: 1, KLong: 1.5, KTrans: 0.2},
		},
		EpsilonInf: iso(2.1),
	}
}

// TestInfraredModes: the fluorite-like crystal has 3 acoustic, 3 silent
// and 3 active modes at Γ; the mode charges exhaust the sum rule
// Σ_m |Z̃_m|² = Σ_s tr(Z_sᵀZ_s)/m_s (completeness of the eigenvectors);
// the active triplet's charges are orthogonal and of equal length (cubic);
// ε₀ obeys LST with the triplet's LO; between TO and LO ε′ < 0 and the
// reflectivity of a weakly damped crystal is near 1 (the reststrahlen
// band), and R lies in [0, 1] everywhere.
func TestInfraredModes(t *testing.T) {
	const z = 1.1
	m := compile(t, fluorite(z), 0)
	ir, err := polar.Infrared(context.Background(), m, polar.IROptions{Direction: [3]float64{1, 0, 0}, DampingTHz: []float64{0.01}})
	if err != nil {
		t.Fatal(err)
	}
	var acoustic, active, silent int
	var sum float64
	var charges [][3]float64
	var toTHz float64
	for _, md := range ir.Modes {
		q := md.Charge[0]*md.Charge[0] + md.Charge[1]*md.Charge[1] + md.Charge[2]*md.Charge[2]
		sum += q
		switch {
		case md.Acoustic:
			acoustic++
		case md.Active:
			active++
			charges = append(charges, md.Charge)
			toTHz = md.FreqTHz
		default:
			silent++
			if q > 1e-20 {
				t.Errorf("silent mode at %.6g THz has |Z̃|² = %.3g e²/amu", md.FreqTHz, q)
			}
		}
	}
	if acoustic != 3 || active != 3 || silent != 3 {
		t.Fatalf("acoustic %d, active %d, silent %d; want 3, 3, 3", acoustic, active, silent)
	}
	rule := 4*z*z*3/40 + 2*z*z*3/19 // Σ_s tr(Z_sᵀZ_s)/m_s
	if !relClose(sum, rule, 1e-12, 0) {
		t.Errorf("Σ|Z̃|² = %.15g e²/amu; sum rule %.15g", sum, rule)
	}
	for i := range charges {
		for j := range charges {
			dot := charges[i][0]*charges[j][0] + charges[i][1]*charges[j][1] + charges[i][2]*charges[j][2]
			want := 0.0
			if i == j {
				want = rule / 3
			}
			if math.Abs(dot-want) > 1e-12*rule {
				t.Errorf("Z̃_%d·Z̃_%d = %.3g; want %.3g", i, j, dot, want)
			}
		}
	}
	lo := ir.LOFreqTHz[len(ir.LOFreqTHz)-1]
	if got, want := lo*lo/(toTHz*toTHz), ir.EpsStaticDir/ir.EpsInfDir; !relClose(got, want, 1e-8, 0) {
		t.Errorf("LST: %.12g vs ε₀/ε∞ %.12g", got, want)
	}
	for _, smp := range ir.Samples {
		if !(smp.Reflectivity >= 0 && smp.Reflectivity <= 1) {
			t.Fatalf("R(%v THz) = %v outside [0, 1]", smp.FreqTHz, smp.Reflectivity)
		}
		if smp.FreqTHz > toTHz*1.02 && smp.FreqTHz < lo*0.98 {
			if real(smp.Eps) >= 0 || smp.Reflectivity < 0.9 {
				t.Errorf("ν = %.4g THz in the reststrahlen band (%.4g–%.4g): ε′ = %.4g, R = %.4g; want ε′ < 0, R > 0.9", smp.FreqTHz, toTHz, lo, real(smp.Eps), smp.Reflectivity)
			}
		}
	}
	// Far above the band, ε → ε∞ and R → ((√ε∞ − 1)/(√ε∞ + 1))².
	last := ir.Samples[len(ir.Samples)-1]
	if last.FreqTHz < lo {
		t.Fatalf("default window ends at %v THz, below the LO %v", last.FreqTHz, lo)
	}
}

// TestInfraredStaticLimit: at ω = 0 the sampled ε is ε₀ whatever the
// damping, and ε″ > 0 at every ω > 0 (absorption).
func TestInfraredStaticLimit(t *testing.T) {
	m := compile(t, rockSalt(1.2, iso(3)), 0)
	ir, err := polar.Infrared(context.Background(), m, polar.IROptions{Direction: [3]float64{0, 1, 0}, FreqTHz: []float64{0, 1, 5, 9.2, 12}, DampingTHz: []float64{0.3}})
	if err != nil {
		t.Fatal(err)
	}
	if e := ir.Samples[0].Eps; cmplx.Abs(e-complex(ir.EpsStaticDir, 0)) > 1e-12*ir.EpsStaticDir {
		t.Errorf("ε(0) = %v; want ε₀ = %v", e, ir.EpsStaticDir)
	}
	for _, smp := range ir.Samples[1:] {
		if imag(smp.Eps) <= 0 {
			t.Errorf("ε″(%v THz) = %v; want > 0", smp.FreqTHz, imag(smp.Eps))
		}
	}
}

// TestInfraredValidation: bad options are reported together with their
// fields.
func TestInfraredValidation(t *testing.T) {
	m := compile(t, rockSalt(1.2, iso(3)), 0)
	_, err := polar.Infrared(context.Background(), m, polar.IROptions{FreqTHz: []float64{-1, math.NaN()}, DampingTHz: []float64{1, 2}})
	ve, ok := err.(*physics.ValidationError)
	if !ok || len(ve.Violations) != 4 {
		t.Fatalf("err = %v; want 4 violations (direction, frequencies[0], frequencies[1], damping)", err)
	}
}

// TestSupercellPartRoundTrip: the supercell's dipole part, summed with the
// phases of a commensurate q over the supercell's cells, gives back the
// raw dipole–dipole term at that q (the inverse of SupercellPart's
// Fourier sum), to 1e-10.
func TestSupercellPartRoundTrip(t *testing.T) {
	c := rockSalt(1.2, iso(3))
	part, err := polar.SupercellPart(context.Background(), c, []int{2, 0, 0, 0, 2, 0, 0, 0, 2}, false)
	if err != nil {
		t.Fatal(err)
	}
	bare := compile(t, &physics.Crystal{Lattice: c.Lattice, Sites: c.Sites, EpsilonInf: c.EpsilonInf}, 0)
	for _, q := range [][3]float64{{0, 0, 0}, {0.5, 0, 0}, {0.5, 0.5, 0.5}, {0, 0.5, 0.5}} {
		d := bare.DynamicalMatrix(q, nil)
		n := bare.ModeCount()
		for s := 0; s < 2; s++ {
			for tt := 0; tt < 2; tt++ {
				var sum [9]complex128
				for n0 := 0; n0 < 2; n0++ {
					for n1 := 0; n1 < 2; n1++ {
						for n2 := 0; n2 < 2; n2++ {
							b := part(s, tt, [3]int{n0, n1, n2})
							ph := cmplx.Rect(1, 2*math.Pi*(q[0]*float64(n0)+q[1]*float64(n1)+q[2]*float64(n2)))
							for k := range sum {
								sum[k] += complex(b[k], 0) * ph
							}
						}
					}
				}
				w := math.Sqrt(bare.MassAmu(s) * bare.MassAmu(tt))
				for al := 0; al < 3; al++ {
					for be := 0; be < 3; be++ {
						want := d[(3*s+al)*n+3*tt+be] * complex(w, 0)
						if cmplx.Abs(sum[3*al+be]-want) > 1e-10*maxAbs(d)*w {
							t.Errorf("q=%v (%d,%d)[%d,%d]: %v; want %v", q, s, tt, al, be, sum[3*al+be], want)
						}
					}
				}
			}
		}
	}
}

// TestPathGammaSides: along a path through Γ a polar model's Γ corner is
// sampled twice, once with each segment's direction, at one distance; the
// frequencies there are the direction-dependent limits (ModesToward), and
// in a uniaxial crystal the two sides differ. The samples next to Γ tend
// to them (the non-analytic term is continuous along a line).
func TestPathGammaSides(t *testing.T) {
	m := compile(t, rockSalt(1.3, diag(2.5, 2.5, 4)), 0)
	// Corners: along b1+b2 (Cartesian (1,1,0)·π/a... in the xy plane) and
	// along b3 − b1 − b2 (Cartesian ∝ (−1,−1,1)·…).
	corners := []physics.PathCorner{
		{Label: "A", Q: [3]float64{0.5, 0.5, 0}, HasQ: true},
		{Label: "G", Q: [3]float64{0, 0, 0}, HasQ: true},
		{Label: "B", Q: [3]float64{0, 0, 0.5}, HasQ: true},
	}
	samples, err := m.Dispersion(context.Background(), corners, physics.PathOptions{Points: 41})
	if err != nil {
		t.Fatal(err)
	}
	if len(samples) != 42 {
		t.Fatalf("%d samples; want 41 + 1 (Γ twice)", len(samples))
	}
	var at []int
	for i, s := range samples {
		if s.Q == ([3]float64{}) {
			at = append(at, i)
		}
	}
	if len(at) != 2 || at[1] != at[0]+1 || samples[at[0]].DistanceInvA != samples[at[1]].DistanceInvA {
		t.Fatalf("Γ samples at %v; want two consecutive at one distance", at)
	}
	in, out := samples[at[0]], samples[at[1]]
	if in.GammaDir != [3]float64{-1, -1, 0} || out.GammaDir != [3]float64{0, 0, 1} {
		t.Errorf("directions %v, %v; want (−1,−1,0) in and (0,0,1) out", in.GammaDir, out.GammaDir)
	}
	for _, s := range []physics.PathSample{in, out} {
		want, _ := m.ModesToward([3]float64{}, m.CartesianQ(s.GammaDir))
		for k := range want {
			if !relClose(s.FreqTHz[k], want[k], 1e-10, want[5]) {
				t.Errorf("Γ along %v: branch %d %.12g THz; ModesToward %.12g", s.GammaDir, k, s.FreqTHz[k], want[k])
			}
		}
	}
	if math.Abs(in.FreqTHz[5]-out.FreqTHz[5]) < 1e-3 {
		t.Errorf("LO %.9g and %.9g THz on the two sides: the uniaxial crystal should split them differently", in.FreqTHz[5], out.FreqTHz[5])
	}
	for _, k := range []int{at[0] - 1, at[1] + 1} {
		g := in
		if k > at[1] {
			g = out
		}
		for b := 3; b < 6; b++ {
			if math.Abs(samples[k].FreqTHz[b]-g.FreqTHz[b]) > 0.05*g.FreqTHz[5] {
				t.Errorf("sample %d next to Γ, branch %d: %.6g THz far from the limit %.6g", k, b, samples[k].FreqTHz[b], g.FreqTHz[b])
			}
		}
	}
}
