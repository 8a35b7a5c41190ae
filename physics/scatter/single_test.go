package scatter

import (
	"context"
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// oneSite gives every site of m the same coherent length b (fm).
func sitesOf(m *physics.Model, b ...float64) []SiteScatterer {
	out := make([]SiteScatterer, m.Sites())
	for i := range out {
		out[i].CoherentFm = b[i%len(b)]
	}
	return out
}

// TestFirstMomentSumRule checks the first-moment (f-) sum rule of the
// one-phonon term for a one-site crystal (Squires, Introduction to the
// Theory of Thermal Neutron Scattering, ch. 3; G. Placzek, Phys. Rev. 86,
// 377 (1952)): ∫ E S₁(Q, E) dE = b²·(ħ²Q²/2M)·e^{−2W(Q)} per atom.
//
// Derivation for our lines: mode s carries ħ²|F_s|²/(2E_s)·(n_s + 1) at
// +E_s and ħ²|F_s|²/(2E_s)·n_s at −E_s, so its first moment is
// E_s·ħ²|F_s|²/(2E_s)·[(n_s + 1) − n_s] = ħ²|F_s|²/2: the Bose factors
// cancel at every T. With one site, F_s = (b/√M) e^{−W} (Q·e_s*), and
// Σ_s |Q·e_s|² = Q² for the p = 3 orthonormal polarisations at any q
// (completeness), so Σ_s ħ²|F_s|²/2 = b² e^{−2W} ħ²Q²/2M exactly. On the
// broadened map the integral is Σ_i E_i S(E_i) ΔE over a window holding
// every line and both tails, which for Gaussians sampled at σ ≥ ΔE equals
// the line sum to far below 1e-6.
func TestFirstMomentSumRule(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	const b = 5.0 // fm
	qs := []QSample{{Q: [3]float64{0.13, -0.41, 0.27}}, {Q: [3]float64{1.3, 0.2, -0.7}}, {Q: [3]float64{2.61, 2.05, -1.77}}}
	for _, tempK := range []float64{0, 40, 300} {
		top := 30.0 // meV, above the fcc example's highest mode (about 20 meV)
		opt := Options{Sites: sitesOf(m, b), TempK: tempK, Axis: Axis{Min: -top, Max: top, Step: 0.01, Unit: physics.MeV}, Resolution: Resolution{FWHM: []float64{0.1}}}
		res, err := ComputeSingle(context.Background(), m, qs, opt)
		if err != nil {
			t.Fatal(err)
		}
		u := res.DW.U[0]
		for _, p := range res.Points {
			qc := p.QCartInvA
			var twoW float64
			for a := 0; a < 3; a++ {
				for c := 0; c < 3; c++ {
					twoW += qc[a] * u[3*a+c] * qc[c]
				}
			}
			q2 := qc[0]*qc[0] + qc[1]*qc[1] + qc[2]*qc[2]
			want := fm2ToBarn * b * b * recoilMeV * q2 / m.MassAmu(0) * math.Exp(-twoW)
			lines := 0.0
			for k, e := range p.Lines.EnergyMeV {
				lines += e * (p.Lines.Creation[k] - p.Lines.Annihilation[k])
			}
			grid := 0.0
			for i, e := range res.Energies {
				grid += e * p.S[i] * 0.01
			}
			if rel := math.Abs(lines/want - 1); rel > 1e-10 {
				t.Errorf("T=%g Q=%v: line first moment %.12g, want %.12g (rel %.1e)", tempK, p.Q, lines, want, rel)
			}
			if rel := math.Abs(grid/want - 1); rel > 1e-6 {
				t.Errorf("T=%g Q=%v: ∫E S dE on the axis %.12g, want %.12g (rel %.1e)", tempK, p.Q, grid, want, rel)
			}
			t.Logf("T=%g K Q=%v: 2W=%.4f, ∫E S dE = %.10g barn·meV/sr, closed form %.10g (lines rel %.1e, axis rel %.1e)",
				tempK, p.Q, twoW, grid, want, lines/want-1, grid/want-1)
		}
	}
}

// TestDetailedBalance checks S(−Q, −E) = e^{−E/k_BT} S(Q, E) (Squires ch.
// 2, detailed balance) line by line: the annihilation weight of each mode
// at −Q against the creation weight at Q, for the two-site example (the
// modes at −Q come from D(−Q) = D(Q)*, diagonalised on their own).
func TestDetailedBalance(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "rocksalt-like"))
	q := [3]float64{0.37, 1.21, -0.55}
	for _, tempK := range []float64{10, 300, 3000} {
		opt := Options{Sites: sitesOf(m, 3.0, -2.0), TempK: tempK, Axis: Axis{Min: -60, Max: 60, Unit: physics.MeV}}
		res, err := ComputeSingle(context.Background(), m, []QSample{{Q: q}, {Q: [3]float64{-q[0], -q[1], -q[2]}}}, opt)
		if err != nil {
			t.Fatal(err)
		}
		kT := physics.BoltzmannEVPerK * tempK * 1e3
		plus, minus := res.Points[0].Lines, res.Points[1].Lines
		for k, e := range plus.EnergyMeV {
			want := math.Exp(-e/kT) * plus.Creation[k]
			if got := minus.Annihilation[k]; math.Abs(got-want) > 1e-10*plus.Creation[k] {
				t.Errorf("T=%g mode %d (E=%.4f meV): S(−Q,−E) weight %.12g, e^{−E/kT}·S(Q,E) = %.12g", tempK, k, e, got, want)
			}
		}
	}
}

// TestTransverseModesInvisible checks that with Q ∥ q in the first zone of
// a one-site cubic crystal the purely transverse modes scatter nothing: F
// ∝ Q·e = 0 for a polarisation e ⊥ Q (Squires ch. 3). Along [100], [110]
// and [111] of the fcc example the modes are purely longitudinal or
// transverse by symmetry.
func TestTransverseModesInvisible(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	conv := QConv{Frame: Conventional, A: 4} // the example's cube: a = 4 Å
	for _, dir := range [][3]float64{{1, 0, 0}, {1, 1, 0}, {1, 1, 1}} {
		var vs physics.Violations
		var qs []QSample
		for _, x := range []float64{0.1, 0.25, 0.4} {
			qs = append(qs, QSample{Q: conv.ToFrac(m, [3]float64{x * dir[0], x * dir[1], x * dir[2]}, "q", &vs)})
		}
		if vs.Len() > 0 {
			t.Fatal(vs.Err())
		}
		res, err := ComputeSingle(context.Background(), m, qs, Options{Sites: sitesOf(m, 5), TempK: 100})
		if err != nil {
			t.Fatal(err)
		}
		for _, p := range res.Points {
			_, vecs, _ := m.NewPointSolver(nil).Solve(p.Q)
			qc := p.QCartInvA
			qn := norm(qc)
			long := 0.0
			for _, w := range p.Lines.Creation {
				long = max(long, w)
			}
			for k := range p.Lines.EnergyMeV {
				// |Q̂·e| of the mode: 1 longitudinal, 0 transverse.
				e := vecs[k*3 : k*3+3]
				var dot complex128
				for a := 0; a < 3; a++ {
					dot += complex(qc[a]/qn, 0) * e[a]
				}
				if math.Abs(real(dot)*real(dot)+imag(dot)*imag(dot)) > 0.5 {
					continue // the longitudinal mode
				}
				if w := p.Lines.Creation[k]; w > 1e-12*long {
					t.Errorf("dir %v Q=%v: transverse mode %d has weight %.3g (longitudinal %.3g)", dir, p.Q, k, w, long)
				}
			}
		}
	}
}

// TestStructureFactorPhase checks the site phases e^{iQ·r_j} with the
// rock-salt-like example: sites P (25 amu) at 0 and Q (80 amu) at
// r = (a/2)(1,1,1), a = 5.6 Å the conventional cube. At a reciprocal
// lattice vector G = (2π/a)(h,k,l) (fcc: h, k, l all even or all odd)
// e^{iG·r} = e^{iπ(h+k+l)} = +1 for all even (the sites in phase) and −1
// for all odd (out of phase). The optical triplet at Γ moves the
// sublattices rigidly against each other with the centre of mass at rest:
// e_P = √(m_Q/M) ε, e_Q = −√(m_P/M) ε (M = m_P + m_Q), so
//
//	Σ_opt |F|² = |G|²/M · (b_P √(m_Q/m_P) − e^{iG·r} b_Q √(m_P/m_Q))²,
//
// which vanishes in the in-phase zones when b_P/m_P = b_Q/m_Q and is then
// largest in the out-of-phase ones. Both are checked against the closed
// form (Debye–Waller off), and with lengths ∝ mass the optical branch
// stays 10⁻³ below the out-of-phase zone a little away from Γ.
func TestStructureFactorPhase(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "rocksalt-like"))
	mP, mQ := m.MassAmu(0), m.MassAmu(1)
	conv := QConv{Frame: Conventional, A: 5.6}
	for _, b := range [][2]float64{{2.5, 8.0}, {4.0, -1.5}} {
		opt := Options{Sites: sitesOf(m, b[0], b[1]), TempK: 300, DebyeWaller: DWOptions{Off: true}}
		var vs physics.Violations
		hkl := [][3]float64{{2, 0, 0}, {2, 2, 0}, {1, 1, 1}, {3, 1, 1}, {4, 2, 2}, {3, 3, 3}}
		var qs []QSample
		for _, g := range hkl {
			qs = append(qs, QSample{Q: conv.ToFrac(m, g, "q", &vs)})
		}
		res, err := ComputeSingle(context.Background(), m, qs, opt)
		if err != nil {
			t.Fatal(err)
		}
		for i, g := range hkl {
			sign := 1.0
			if int(g[0]+g[1]+g[2])%2 != 0 {
				sign = -1
			}
			l := res.Points[i].Lines
			eOpt := l.EnergyMeV[3]
			got := l.Creation[3] + l.Creation[4] + l.Creation[5]
			qc := res.Points[i].QCartInvA
			g2 := qc[0]*qc[0] + qc[1]*qc[1] + qc[2]*qc[2]
			amp := b[0]*math.Sqrt(mQ/mP) - sign*b[1]*math.Sqrt(mP/mQ)
			want := fm2ToBarn * recoilMeV * g2 / (mP + mQ) * amp * amp / eOpt * (bose(eOpt, res.kT(300)) + 1)
			if math.Abs(got-want) > 1e-9*math.Max(want, 1e-3) {
				t.Errorf("b=%v G=%v: optical weight %.10g, closed form %.10g", b, g, got, want)
			}
			t.Logf("b=%v fm G=(%g %g %g) e^{iG·r}=%+g: optical weight %.6g barn/sr (closed form %.6g)", b, g[0], g[1], g[2], sign, got, want)
		}
	}
	// Lengths ∝ mass, slightly off Γ: still at most 1e-3 of the out-of-phase zone.
	opt := Options{Sites: sitesOf(m, 2.5, 8.0), TempK: 300, DebyeWaller: DWOptions{Off: true}}
	var vs physics.Violations
	in := conv.ToFrac(m, [3]float64{2.02, 0, 0}, "q", &vs)
	out := conv.ToFrac(m, [3]float64{1.02, 1, 1}, "q", &vs)
	res, err := ComputeSingle(context.Background(), m, []QSample{{Q: in}, {Q: out}}, opt)
	if err != nil {
		t.Fatal(err)
	}
	opIn := res.Points[0].Lines.Creation[3] + res.Points[0].Lines.Creation[4] + res.Points[0].Lines.Creation[5]
	opOut := res.Points[1].Lines.Creation[3] + res.Points[1].Lines.Creation[4] + res.Points[1].Lines.Creation[5]
	if !(opIn < 1e-3*opOut) {
		t.Errorf("off Γ, in phase: optical %.4g, out of phase %.4g: not suppressed", opIn, opOut)
	}
	t.Logf("q = (0.02,0,0)·2π/a off (200) and (111): optical %.4g vs %.4g barn/sr (ratio %.2e)", opIn, opOut, opIn/opOut)
}

// kT is k_BT in meV (tests).
func (r *SingleResult) kT(tempK float64) float64 { return physics.BoltzmannEVPerK * tempK * 1e3 }

// TestSupercellSameScattering checks the phase convention where it
// matters: a crystal described by a supercell (here the fcc example as
// its 4-site conventional cube and as a 2×1×1 cell) is the same crystal,
// so S(Q, E) at any Cartesian Q must be the same (Squires ch. 3: the
// cross-section does not depend on the choice of cell). The supercell's
// sites sit at r_j ≠ 0 and its eigenvectors at general q are complex, so
// a wrong sign of the site phase e^{iQ·r_j}, or e where e* belongs,
// changes the answer. S is per cell and the cell's Brillouin zone is
// det(M) times smaller, so the supercell's S per cell is det(M) times the
// primitive one (the crystal's cross-section, per cell times cells, is
// the same). Debye–Waller off (the grids would differ).
func TestSupercellSameScattering(t *testing.T) {
	prim := testmodels.Load(t, "fcc")
	m1 := testmodels.Compile(t, prim)
	axis := Axis{Min: -25, Max: 25, Step: 0.05, Unit: physics.MeV}
	opt := Options{TempK: 150, DebyeWaller: DWOptions{Off: true}, Axis: axis, Resolution: Resolution{FWHM: []float64{0.4}}}
	qcs := [][3]float64{{0.31, 0.77, -0.45}, {2.1, -1.3, 0.6}, {-3.3, 0.4, 4.1}}
	for _, mt := range [][3][3]int{{{-1, 1, 1}, {1, -1, 1}, {1, 1, -1}}, {{2, 0, 0}, {0, 1, 0}, {0, 0, 1}}} {
		m2 := testmodels.Compile(t, testmodels.Supercell(t, prim, mt))
		var vs physics.Violations
		var q1, q2 []QSample
		for _, qc := range qcs {
			q1 = append(q1, QSample{Q: QConv{Frame: Cartesian}.ToFrac(m1, qc, "q", &vs)})
			q2 = append(q2, QSample{Q: QConv{Frame: Cartesian}.ToFrac(m2, qc, "q", &vs)})
		}
		if vs.Len() > 0 {
			t.Fatal(vs.Err())
		}
		o1, o2 := opt, opt
		o1.Sites, o2.Sites = sitesOf(m1, 5), sitesOf(m2, 5)
		r1, err := ComputeSingle(context.Background(), m1, q1, o1)
		if err != nil {
			t.Fatal(err)
		}
		r2, err := ComputeSingle(context.Background(), m2, q2, o2)
		if err != nil {
			t.Fatal(err)
		}
		det := float64(m2.Sites())
		for i := range qcs {
			peak, worst := 0.0, 0.0
			for k := range r1.Points[i].S {
				peak = max(peak, r1.Points[i].S[k])
				worst = max(worst, math.Abs(r1.Points[i].S[k]-r2.Points[i].S[k]/det))
			}
			if !(peak > 0) || worst > 1e-9*peak {
				t.Errorf("supercell %v Q=%v Å⁻¹: S differs by %.3g (peak %.4g)", mt, qcs[i], worst, peak)
			}
			t.Logf("supercell %v Q=%v Å⁻¹: max |ΔS| %.2e of peak %.4g", mt, qcs[i], worst, peak)
		}
	}
}
