package spectra

import (
	"context"
	"errors"
	"math"
	"slices"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
)

func mustDOS(t testing.TB, m *physics.Model, g *physics.GridModes, opt DOSOptions) *DOSResult {
	t.Helper()
	r, err := ComputeDOS(testmodels.Ctx(t), m, g, opt)
	if err != nil {
		t.Fatalf("ComputeDOS(%+v): %v", opt, err)
	}
	return r
}

// chainStatesBelow is the exact number of states per cell below ν of the
// monatomic chain, ∫ (2/π)(ν_m² − ν²)^(−1/2) dν = (2/π) arcsin(ν/ν_m)
// (Ashcroft & Mermin ch. 23; Kittel ch. 5).
func chainStatesBelow(nu float64) float64 {
	switch {
	case nu <= 0:
		return 0
	case nu >= testmodels.ChainNuMaxTHz:
		return 1
	}
	return 2 / math.Pi * math.Asin(nu/testmodels.ChainNuMaxTHz)
}

// chainL1 is the L1 distance ∫|g − g_exact| between a chain DOS and the
// exact bin averages of the closed form, in states per cell.
func chainL1(r *DOSResult) float64 {
	h := r.Freq[1] - r.Freq[0]
	l1 := 0.0
	for i, f := range r.Freq {
		want := (chainStatesBelow(f+h/2) - chainStatesBelow(f-h/2)) / h
		l1 += math.Abs(r.DOS[i]-want) * h
	}
	return l1
}

// TestDOSChainClosedForm: the segment DOS of the monatomic chain on 4096
// points against g(ν) = (2/π)/sqrt(ν_max² − ν²) per cell (Ashcroft &
// Mermin ch. 23; Kittel ch. 5), compared bin by bin with the exact bin
// averages, and the integrated DOS against (2/π) arcsin(ν/ν_max).
// Tolerances are 3× the measured errors (L1 2.9e-6, integrated 4.6e-7).
func TestDOSChainClosedForm(t *testing.T) {
	m, g := testmodels.Grid(t, "chain", mesh.GridSpec{Mesh: [3]int{4096}}, physics.GridOptions{})
	r := mustDOS(t, m, g, DOSOptions{Max: 1.05 * testmodels.ChainNuMaxTHz, Step: testmodels.ChainNuMaxTHz / 200})
	if l1 := chainL1(r); l1 > 1e-5 {
		t.Errorf("L1 distance to the closed form %.3g; want < 1e-5", l1)
	}
	for i, f := range r.Freq {
		if d := math.Abs(r.Integrated[i] - chainStatesBelow(f)); d > 1.5e-6 {
			t.Errorf("N(%.4f THz) = %.8f; closed form %.8f", f, r.Integrated[i], chainStatesBelow(f))
		}
	}
	// The density at ν → 0 is 2/(π ν_max) per cell per THz.
	if got, want := r.DOS[1], 2/(math.Pi*testmodels.ChainNuMaxTHz); math.Abs(got-want) > 1e-4*want {
		t.Errorf("g(%.4f THz) = %.6f; want ≈ 2/(π ν_max) = %.6f", r.Freq[1], got, want)
	}
}

// TestDOSChainConvergence: the segment DOS converges to the closed form as
// the grid grows, roughly as N⁻² (each doubling must at least halve the L1
// error), and the Gaussian DOS at its default width converges too, more
// slowly (Ashcroft & Mermin ch. 23 for the closed form). The errors are
// logged: go test -run TestDOSChainConvergence -v ./physics/.
func TestDOSChainConvergence(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "chain"))
	prev := map[DOSMethod]float64{}
	for _, n := range []int{32, 64, 128, 256, 512, 1024, 2048} {
		g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{n}}, physics.GridOptions{})
		for _, meth := range []DOSMethod{Tetrahedron, Gaussian} {
			r := mustDOS(t, m, g, DOSOptions{Method: meth, Max: 1.05 * testmodels.ChainNuMaxTHz, Step: testmodels.ChainNuMaxTHz / 200})
			l1 := chainL1(r)
			t.Logf("N = %5d  %-11v L1 = %.3g", n, meth, l1)
			if p, ok := prev[meth]; ok {
				factor := map[DOSMethod]float64{Tetrahedron: 2, Gaussian: 1}[meth]
				if l1*factor >= p {
					t.Errorf("%v: L1 error %.3g at N = %d did not fall by %g× from %.3g", meth, l1, n, factor, p)
				}
			}
			prev[meth] = l1
		}
	}
	if prev[Tetrahedron] > 1e-4 {
		t.Errorf("segments at N = 2048: L1 = %.3g; want < 1e-4", prev[Tetrahedron])
	}
}

// TestDOSChainZoneEdge: the chain DOS diverges at the zone edge as
// (ν_max − ν)^(−1/2), where the group velocity goes to zero (van Hove
// singularity; Ashcroft & Mermin ch. 23, Kittel ch. 5). The log-log slope
// over 0.5 %–10 % of ν_max below the edge is −½ to 0.02.
func TestDOSChainZoneEdge(t *testing.T) {
	m, g := testmodels.Grid(t, "chain", mesh.GridSpec{Mesh: [3]int{65536}}, physics.GridOptions{})
	r := mustDOS(t, m, g, DOSOptions{Max: testmodels.ChainNuMaxTHz, Step: testmodels.ChainNuMaxTHz / 2000})
	var xs, ys []float64
	for i, f := range r.Freq {
		gap := (testmodels.ChainNuMaxTHz - f) / testmodels.ChainNuMaxTHz
		if gap >= 0.005 && gap <= 0.1 {
			xs = append(xs, math.Log(gap))
			ys = append(ys, math.Log(r.DOS[i]))
		}
	}
	if slope := fitSlope(xs, ys); math.Abs(slope+0.5) > 0.02 {
		t.Errorf("log g vs log(ν_max − ν): slope %.4f; want −0.5", slope)
	}
	last := r.DOS[len(r.DOS)-2]
	if first := r.DOS[1]; !(last > 20*first) {
		t.Errorf("g just below the edge %.4g is not ≫ g near 0 (%.4g)", last, first)
	}
}

// fitSlope is the least-squares slope of y against x.
func fitSlope(x, y []float64) float64 {
	var sx, sy, sxx, sxy float64
	n := float64(len(x))
	for i := range x {
		sx += x[i]
		sy += y[i]
		sxx += x[i] * x[i]
		sxy += x[i] * y[i]
	}
	return (n*sxy - sx*sy) / (n*sxx - sx*sx)
}

// TestDOSNormalization: ∫g dν = p × sites per cell (common practice: the
// modes per cell), to 1e-6 for tetrahedra (the project's requirement; it
// comes out at rounding), exactly for the histogram, and for Gaussians when
// the window holds their tails; the last integrated value is the same
// number and StatesPerCell reports it.
func TestDOSNormalization(t *testing.T) {
	for _, tc := range []struct {
		name string
		mesh [3]int
	}{
		{"chain", [3]int{64}},
		{"diatomic-chain", [3]int{50}},
		{"square-net", [3]int{20, 20}},
		{"fcc", [3]int{8, 8, 8}},
		{"rocksalt-like", [3]int{6, 6, 6}},
	} {
		m, g := testmodels.Grid(t, tc.name, mesh.GridSpec{Mesh: tc.mesh}, physics.GridOptions{Projections: true})
		want := float64(m.Polarizations() * m.Sites())
		for _, meth := range []DOSMethod{Tetrahedron, Histogram, Gaussian} {
			t.Run(tc.name+"/"+meth.String(), func(t *testing.T) {
				opt := DOSOptions{Method: meth, PerSite: true}
				tol := 1e-6
				if meth == Gaussian {
					// A window with room for the tails below 0.
					top := Stats(g).MaxTHz
					w := defaultGaussianWidth(top, tc.mesh, m.Dim())
					opt.Min, opt.Max, opt.Step = -9*w, top+9*w, top/400
					tol = 1e-9
				}
				if meth == Histogram {
					tol = 1e-12
				}
				r := mustDOS(t, m, g, opt)
				if r.StatesPerCell != want {
					t.Errorf("StatesPerCell = %v; want %v", r.StatesPerCell, want)
				}
				if got := testmodels.StepIntegral(r.Freq, r.DOS); math.Abs(got-want) > tol {
					t.Errorf("∫g = %.12f; want %v ± %g", got, want, tol)
				}
				if got := r.Integrated[len(r.Integrated)-1]; math.Abs(got-want) > tol {
					t.Errorf("N(top) = %.12f; want %v", got, want)
				}
				// Each site carries p states: Σ_modes |e_s|² = p at every q by
				// the completeness of the eigenvectors (common practice).
				for s, d := range r.Sites {
					if got := testmodels.StepIntegral(r.Freq, d); math.Abs(got-float64(m.Polarizations())) > tol {
						t.Errorf("∫g_site%d = %.12f; want p = %d", s, got, m.Polarizations())
					}
				}
			})
		}
	}
}

// TestProjectedDOSSum: per-site and per-label DOS sum to the total at every
// sample to 1e-9 (the project's requirement), and the total with projections
// equals the total without (to 1e-10 of the peak): the corner weights of
// the simplex method integrate to its state count (Blöchl, Jepsen &
// Andersen 1994, App. B).
func TestProjectedDOSSum(t *testing.T) {
	for _, tc := range []struct {
		name string
		mesh [3]int
	}{
		{"diatomic-chain", [3]int{64}},
		{"square-net", [3]int{16, 16}},
		{"rocksalt-like", [3]int{8, 8, 8}},
	} {
		m, g := testmodels.Grid(t, tc.name, mesh.GridSpec{Mesh: tc.mesh}, physics.GridOptions{Projections: true})
		for _, meth := range []DOSMethod{Tetrahedron, Gaussian, Histogram} {
			t.Run(tc.name+"/"+meth.String(), func(t *testing.T) {
				with := mustDOS(t, m, g, DOSOptions{Method: meth, PerSite: true})
				without := mustDOS(t, m, g, DOSOptions{Method: meth})
				peak := slices.Max(without.DOS)
				labels := m.Labels()
				for i := range with.DOS {
					ss, ls := 0.0, 0.0
					for s := range with.Sites {
						ss += with.Sites[s][i]
					}
					for l := range with.LabelDOS {
						ls += with.LabelDOS[l][i]
					}
					if math.Abs(ss-with.DOS[i]) > 1e-9 || math.Abs(ls-with.DOS[i]) > 1e-9 {
						t.Fatalf("ν = %.4f: Σ sites %.15g, Σ labels %.15g, total %.15g", with.Freq[i], ss, ls, with.DOS[i])
					}
					if math.Abs(with.DOS[i]-without.DOS[i]) > 1e-10*peak {
						t.Fatalf("ν = %.4f: total with projections %.15g, without %.15g", with.Freq[i], with.DOS[i], without.DOS[i])
					}
				}
				if len(with.Labels) == 0 || with.Labels[0] != labels[0] {
					t.Errorf("labels %v; want first-appearance order of %v", with.Labels, labels)
				}
			})
		}
	}
}

// diatomicEdges are the diatomic chain example's gap edges and optical top
// in THz (proto/examples/diatomic-chain.json: K = 2 eV/Å², m = 20 amu
// light, M = 50 amu heavy): sqrt(2K/M), sqrt(2K/m) and sqrt(2K(1/m + 1/M))
// (Kittel, Introduction to Solid State Physics, ch. 4).
var diatomicEdges = [3]float64{
	math.Sqrt(2*2.0/50) * physics.NuUnitTHz,
	math.Sqrt(2*2.0/20) * physics.NuUnitTHz,
	math.Sqrt(2*2.0*(1.0/20+1.0/50)) * physics.NuUnitTHz,
}

// TestDiatomicGap: the diatomic chain has no states between the top of the
// acoustic band sqrt(2K/M) and the bottom of the optical band sqrt(2K/m)
// (Kittel ch. 4); both edges are zone-edge van Hove divergences; at the
// zone edge the acoustic mode moves only the heavy atoms and the optical
// mode only the light ones (Kittel ch. 4), so the label projections near
// each edge belong to one species.
func TestDiatomicGap(t *testing.T) {
	m, g := testmodels.Grid(t, "diatomic-chain", mesh.GridSpec{Mesh: [3]int{512}}, physics.GridOptions{Projections: true})
	lo, hi, top := diatomicEdges[0], diatomicEdges[1], diatomicEdges[2]
	step := top / 1000
	r := mustDOS(t, m, g, DOSOptions{Max: 1.02 * top, Step: step, PerSite: true})
	light, heavy := slices.Index(r.Labels, "L"), slices.Index(r.Labels, "H")
	if light < 0 || heavy < 0 {
		t.Fatalf("labels %v; want L and H", r.Labels)
	}
	inGap, below, above := 0, -1, -1
	for i, f := range r.Freq {
		switch {
		case f-step/2 > lo*1.001 && f+step/2 < hi*0.999:
			inGap++
			if r.DOS[i] > 1e-12 {
				t.Errorf("g(%.4f THz) = %.3g inside the gap (%.4f, %.4f)", f, r.DOS[i], lo, hi)
			}
			if math.Abs(r.Integrated[i]-1) > 1e-9 {
				t.Errorf("N(%.4f THz) = %.12f in the gap; want the acoustic band's 1 state", f, r.Integrated[i])
			}
		case f+step/2 < lo:
			below = i
		case f-step/2 > hi && above < 0:
			above = i
		}
	}
	if inGap < 100 {
		t.Fatalf("only %d samples in the gap", inGap)
	}
	mid := r.DOS[slices.IndexFunc(r.Freq, func(f float64) bool { return f > lo/2 })]
	for _, edge := range []struct {
		name    string
		i       int
		species int
	}{{"acoustic top", below, heavy}, {"optical bottom", above, light}} {
		i := edge.i
		if r.DOS[i] < 2*mid {
			t.Errorf("%s: g(%.4f) = %.4g, no divergence (mid-band %.4g)", edge.name, r.Freq[i], r.DOS[i], mid)
		}
		if share := r.LabelDOS[edge.species][i] / r.DOS[i]; share < 0.9 {
			t.Errorf("%s: share of %s %.3f; want > 0.9", edge.name, r.Labels[edge.species], share)
		}
	}
}

// TestDOSUnits: in meV and cm⁻¹ the frequencies scale by the unit's
// factor (1 THz = 4.135667697 meV = 33.35640952 cm⁻¹: h·10¹²/e and
// 10¹⁰/c with CODATA 2018 h, e and c), g by its inverse (states per cell
// per unit), the integrated
// DOS not at all.
func TestDOSUnits(t *testing.T) {
	m, g := testmodels.Grid(t, "rocksalt-like", mesh.GridSpec{Mesh: [3]int{6, 6, 6}}, physics.GridOptions{})
	ref := mustDOS(t, m, g, DOSOptions{Max: 10, Step: 0.05})
	for _, tc := range []struct {
		name   string
		unit   physics.Unit
		factor float64
	}{
		{"meV", physics.MeV, 4.135667697},
		{"cm-1", physics.CM1, 33.35640952},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if math.Abs(tc.unit.PerTHz()/tc.factor-1) > 1e-9 {
				t.Fatalf("%v per THz = %.10g; want %.10g", tc.unit, tc.unit.PerTHz(), tc.factor)
			}
			f := tc.unit.PerTHz()
			r := mustDOS(t, m, g, DOSOptions{Unit: tc.unit, Max: 10 * f, Step: 0.05 * f})
			if r.Unit != tc.unit || len(r.Freq) != len(ref.Freq) {
				t.Fatalf("unit %v, %d samples; want %v, %d", r.Unit, len(r.Freq), tc.unit, len(ref.Freq))
			}
			for i := range r.Freq {
				if math.Abs(r.Freq[i]-ref.Freq[i]*f) > 1e-9*f ||
					math.Abs(r.DOS[i]*f-ref.DOS[i]) > 1e-9*(1+ref.DOS[i]) ||
					math.Abs(r.Integrated[i]-ref.Integrated[i]) > 1e-12 {
					t.Fatalf("sample %d: (%g, %g, %g) vs THz (%g, %g, %g)", i, r.Freq[i], r.DOS[i], r.Integrated[i], ref.Freq[i], ref.DOS[i], ref.Integrated[i])
				}
			}
		})
	}
}

// TestDOSImaginary: imaginary modes are counted; by default they are left
// out of the DOS (the states in the window are the real ones), and with
// NegativeAxis they appear at negative frequencies with the full
// normalisation (common practice: imaginary modes as negative numbers).
func TestDOSImaginary(t *testing.T) {
	m := testmodels.Compile(t, testmodels.UnstableChain())
	g := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{400}}, physics.GridOptions{})
	st := Stats(g)
	want := 0 // Γ's acoustic mode is 0 here (springs keep the sum rule)
	for _, f := range g.FreqTHz {
		if f < 0 { // every negative frequency is imaginary (doc.go)
			want++
		}
	}
	if want == 0 {
		t.Fatal("the test model has no imaginary modes")
	}
	real := 1 - float64(want)/400
	for _, meth := range []DOSMethod{Tetrahedron, Histogram} {
		t.Run(meth.String(), func(t *testing.T) {
			ex := mustDOS(t, m, g, DOSOptions{Method: meth})
			if ex.Imaginary != want {
				t.Errorf("Imaginary = %d; want %d", ex.Imaginary, want)
			}
			if ex.Freq[0] != 0 {
				t.Errorf("excluding: window starts at %g; want 0", ex.Freq[0])
			}
			tol := 1e-12
			if meth == Tetrahedron {
				tol = 2.0 / 400 // the segments straddling ν = 0 put part of a point's weight on each side
			}
			if got := testmodels.StepIntegral(ex.Freq, ex.DOS); math.Abs(got-real) > tol {
				t.Errorf("excluding: ∫g = %.6f; want the real modes' %.6f", got, real)
			}
			neg := mustDOS(t, m, g, DOSOptions{Method: meth, NegativeAxis: true})
			if !(neg.Freq[0] < st.MinTHz) {
				t.Errorf("negative axis: window starts at %g, above the lowest mode %g", neg.Freq[0], st.MinTHz)
			}
			if got := testmodels.StepIntegral(neg.Freq, neg.DOS); math.Abs(got-1) > 1e-9 {
				t.Errorf("negative axis: ∫g = %.12f; want 1", got)
			}
			below := 0.0
			for i, f := range neg.Freq {
				if f < st.MinTHz/2 {
					below += neg.DOS[i]
				}
			}
			if !(below > 0) {
				t.Error("negative axis: no states at negative frequencies")
			}
		})
	}
}

// TestHistogramFiniteCrystal: the histogram of a finite ring of 8 cells is
// its exact discrete spectrum: ν_n = ν_max |sin(πn/8)|, n = −3…4, each
// wavevector carrying 1/8 of a state per cell (allowed q = 2πn/(Na): common
// practice; dispersion Kittel ch. 4).
func TestHistogramFiniteCrystal(t *testing.T) {
	m, g := testmodels.Grid(t, "chain", mesh.GridSpec{Mesh: [3]int{8}, Finite: true}, physics.GridOptions{})
	step := 1e-3
	r := mustDOS(t, m, g, DOSOptions{Method: Histogram, Max: 1.1 * testmodels.ChainNuMaxTHz, Step: step})
	want := map[int]float64{} // sample index → states
	for n := -3; n <= 4; n++ {
		nu := testmodels.ChainNuMaxTHz * math.Abs(math.Sin(math.Pi*float64(n)/8))
		want[int(math.Round(nu/step))] += 1.0 / 8
	}
	for i := range r.DOS {
		if got := r.DOS[i] * step; math.Abs(got-want[i]) > 1e-12 {
			t.Errorf("bin at %.3f THz holds %.6f states; want %.6f", r.Freq[i], got, want[i])
		}
	}
}

// TestGaussianWidth: the default width is ν_top / (c_d·N^(1/d)), c_d = 1,
// 2, 8, as documented,
// and is reported; a given width is used as is; a broad Gaussian and the
// tetrahedron DOS agree in the mean frequency ⟨ν⟩ = ∫νg/∫g, which smearing
// does not move (common practice).
func TestGaussianWidth(t *testing.T) {
	m, g := testmodels.Grid(t, "rocksalt-like", mesh.GridSpec{Mesh: [3]int{10, 10, 10}}, physics.GridOptions{})
	top := Stats(g).MaxTHz
	def := mustDOS(t, m, g, DOSOptions{Method: Gaussian})
	if want := top / (8 * 10); math.Abs(def.Width-want) > 1e-12*want {
		t.Errorf("default width %.6g; want ν_top/(8·N^(1/3)) = %.6g", def.Width, want)
	}
	m1, g1 := testmodels.Grid(t, "chain", mesh.GridSpec{Mesh: [3]int{100}}, physics.GridOptions{})
	if got, want := mustDOS(t, m1, g1, DOSOptions{Method: Gaussian}).Width, testmodels.ChainNuMaxTHz/100; math.Abs(got-want) > 1e-9*want {
		t.Errorf("1D default width %.6g; want ν_top/N = %.6g", got, want)
	}
	w := mustDOS(t, m, g, DOSOptions{Method: Gaussian, Width: 0.2, Min: -2, Max: top + 2})
	if w.Width != 0.2 {
		t.Errorf("width %v; want the given 0.2", w.Width)
	}
	tet := mustDOS(t, m, g, DOSOptions{})
	mean := func(r *DOSResult) float64 {
		s, n := 0.0, 0.0
		for i, f := range r.Freq {
			s += f * r.DOS[i]
			n += r.DOS[i]
		}
		return s / n
	}
	if a, b := mean(w), mean(tet); math.Abs(a-b) > 1e-3*b {
		t.Errorf("⟨ν⟩ Gaussian %.6f, tetrahedron %.6f", a, b)
	}
}

// TestDOSShiftedGrid: a shifted grid (no Γ point) is cut into tetrahedra
// the same way and gives the same normalisation and, at 12³, a DOS within
// 3 % (L1) of the Γ-centred one (common practice: both sample the same
// zone).
func TestDOSShiftedGrid(t *testing.T) {
	m, g0 := testmodels.Grid(t, "fcc", mesh.GridSpec{Mesh: [3]int{12, 12, 12}}, physics.GridOptions{})
	g1 := testmodels.Modes(t, m, mesh.GridSpec{Mesh: [3]int{12, 12, 12}, Shifted: true}, physics.GridOptions{})
	opt := DOSOptions{Max: 8, Step: 0.04}
	a, b := mustDOS(t, m, g0, opt), mustDOS(t, m, g1, opt)
	if got := testmodels.StepIntegral(b.Freq, b.DOS); math.Abs(got-3) > 1e-6 {
		t.Errorf("shifted: ∫g = %.9f; want 3", got)
	}
	l1 := 0.0
	for i := range a.DOS {
		l1 += math.Abs(a.DOS[i]-b.DOS[i]) * 0.04
	}
	if l1 > 0.03*3 {
		t.Errorf("Γ-centred vs shifted L1 = %.4f states; want < 3 %%", l1)
	}
}

// TestDOSValidation: bad options are refused with every violation named by
// its field; wrong grid modes are refused with a plain error.
func TestDOSValidation(t *testing.T) {
	m, g := testmodels.Grid(t, "chain", mesh.GridSpec{Mesh: [3]int{16}}, physics.GridOptions{})
	for _, tc := range []struct {
		name   string
		opt    DOSOptions
		fields []string
	}{
		{"method", DOSOptions{Method: 7}, []string{"method"}},
		{"unit", DOSOptions{Unit: 9}, []string{"unit"}},
		{"window", DOSOptions{Min: 5, Max: 1}, []string{"max"}},
		{"negative step", DOSOptions{Step: -1}, []string{"step"}},
		{"negative width", DOSOptions{Method: Gaussian, Width: -1}, []string{"width"}},
		{"width without gaussian", DOSOptions{Width: 0.1}, []string{"width"}},
		{"not finite", DOSOptions{Min: math.NaN(), Max: math.Inf(1)}, []string{"min", "max"}},
		{"all at once", DOSOptions{Method: 7, Unit: -1, Step: -2, Min: 3, Max: 2}, []string{"method", "unit", "max", "step"}},
		{"too many samples", DOSOptions{Max: 10, Step: 1e-6}, []string{"step"}},
		{"tiny step", DOSOptions{Max: 10, Step: 1e-300}, []string{"step"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ComputeDOS(testmodels.Ctx(t), m, g, tc.opt)
			var ve *physics.ValidationError
			if !errors.As(err, &ve) {
				t.Fatalf("got %v; want a *ValidationError", err)
			}
			var got []string
			for _, v := range ve.Violations {
				if !slices.Contains(got, v.Field) {
					got = append(got, v.Field)
				}
			}
			slices.Sort(got)
			want := slices.Clone(tc.fields)
			slices.Sort(want)
			if !slices.Equal(got, want) {
				t.Errorf("fields %v; want %v (%v)", got, want, err)
			}
		})
	}
	if r, err := ComputeDOS(testmodels.Ctx(t), m, g, DOSOptions{Max: 1e-300}); err != nil || len(r.Freq) != DefaultDOSBins+1 {
		t.Errorf("a window of 1e-300 THz: %v; want %d samples", err, DefaultDOSBins+1)
	}
	if _, err := ComputeDOS(testmodels.Ctx(t), m, g, DOSOptions{PerSite: true}); err == nil {
		t.Error("per-site DOS of modes without site weights: no error")
	}
	part := *g
	part.Points, part.FreqTHz = g.Points[:8], g.FreqTHz[:8]
	if _, err := ComputeDOS(testmodels.Ctx(t), m, &part, DOSOptions{}); err == nil {
		t.Error("tetrahedra on part of a grid: no error")
	}
	other := testmodels.Compile(t, testmodels.Load(t, "diatomic-chain"))
	if _, err := ComputeDOS(testmodels.Ctx(t), other, g, DOSOptions{}); err == nil {
		t.Error("modes of another model: no error")
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := ComputeDOS(ctx, m, g, DOSOptions{}); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled context: got %v; want context.Canceled", err)
	}
}

// TestNormalCDF: the tabulated Gaussian cumulative distribution against
// ½ erfc(−u/√2) (A&S 26.2.2, 7.1.2) at 20 000 points, to 1e-11.
func TestNormalCDF(t *testing.T) {
	for i := 0; i <= 20000; i++ {
		u := -9 + 18*float64(i)/20000
		want := 0.5 * math.Erfc(-u/math.Sqrt2)
		if u <= -gaussianCutoff {
			want = 0
		} else if u >= gaussianCutoff {
			want = 1
		}
		if got := normalCDF(u); math.Abs(got-want) > 1e-11 {
			t.Fatalf("Φ(%g) = %.15g; want %.15g", u, got, want)
		}
	}
}

// axisTriple is a test crystal of three like atoms on the three axes of a
// simple cubic cell, at (x,0,0), (0,x,0), (0,0,x): the six operations that
// permute the axes map it onto itself and permute its sites, and no
// operation fixing every q-point (a translation) or sending q to −q (an
// inversion) does, so the points of an orbit have different site weights.
const axisTriple = `{
  "name": "axis-triple",
  "lattice": [{"x": 4.0, "y": 0, "z": 0}, {"x": 0, "y": 4.0, "z": 0}, {"x": 0, "y": 0, "z": 4.0}],
  "polarizations": 3,
  "forceUnit": "FORCE_UNIT_EV_PER_A2",
  "sites": [
    {"label": "A", "massAmu": 30.0, "frac": [0.25, 0.0, 0.0]},
    {"label": "A", "massAmu": 30.0, "frac": [0.0, 0.25, 0.0]},
    {"label": "A", "massAmu": 30.0, "frac": [0.0, 0.0, 0.25]}
  ],
  "shells": [
    {"fromLabel": "A", "toLabel": "A", "shell": 1, "kLong": 2.0, "kTrans": 0.3},
    {"fromLabel": "A", "toLabel": "A", "shell": 2, "kLong": 1.0, "kTrans": 0.2},
    {"fromLabel": "A", "toLabel": "A", "shell": 3, "kLong": 0.5, "kTrans": 0.1}
  ]
}`

// TestOrbitSumsMatchEveryPoint: the Gaussian and histogram DOS place each
// orbit of the symmetry reduction once, with its points' weights and site
// shares summed (modeAccumulate). The result must be the sum over every
// point of the grid: checked per site against the same DOS from modes
// computed with NoSymmetry (every point diagonalised, no reduction), on a
// crystal whose operations permute its sites (axisTriple; a wrong sum,
// e.g. the first point's shares for the whole orbit, fails it) and on one
// of two unlike sites (rock-salt-like).
func TestOrbitSumsMatchEveryPoint(t *testing.T) {
	for _, c := range []*physics.Crystal{testmodels.Decode(t, "axis-triple", []byte(axisTriple)), testmodels.Load(t, "rocksalt-like")} {
		m := testmodels.Compile(t, c)
		spec := mesh.GridSpec{Mesh: [3]int{6, 6, 6}}
		reduced := testmodels.Modes(t, m, spec, physics.GridOptions{Projections: true})
		every := testmodels.Modes(t, m, spec, physics.GridOptions{Projections: true, NoSymmetry: true})
		orb := pointOrbits(reduced)
		largest := 0
		for o := range orb.count() {
			var one [1]int32
			largest = max(largest, len(orb.members(o, &one)))
		}
		if reduced.Reduction() == nil || largest < 6 || pointOrbits(every).count() != len(every.Points) {
			t.Fatalf("%s: want a reduced grid with orbits of 6 points or more (largest %d) against one without", c.Name, largest)
		}
		for _, meth := range []DOSMethod{Gaussian, Histogram} {
			opt := DOSOptions{Method: meth, PerSite: true, Min: 0, Max: 12, Step: 0.05, NegativeAxis: true}
			if meth == Gaussian {
				opt.Width = 0.2
			}
			a, b := mustDOS(t, m, reduced, opt), mustDOS(t, m, every, opt)
			peak := slices.Max(b.DOS)
			worst := 0.0
			for i := range b.DOS {
				worst = max(worst, math.Abs(a.DOS[i]-b.DOS[i]))
				for s := range b.Sites {
					worst = max(worst, math.Abs(a.Sites[s][i]-b.Sites[s][i]))
				}
			}
			if worst > 1e-12*peak {
				t.Errorf("%s %v: orbit sums differ from every point's by %.3g (peak %.3g)", c.Name, meth, worst, peak)
			}
		}
	}
}
