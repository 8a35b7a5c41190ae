// Closed-form spectra: chains, fcc, square net, blocks, sum rule,
// imaginary modes and units.

package physics_test

import (
	"context"
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"

	"github.com/materials-lab/modegrid/physics/lattice"
)

func relClose(got, want, tol float64) bool {
	return math.Abs(got-want) <= tol*math.Max(math.Abs(want), 1e-300)
}

// TestMonatomicChainDispersion checks ω(q) = 2 sqrt(K/M) |sin(qa/2)|
// (Kittel, Introduction to Solid State Physics, ch. 4; Ashcroft & Mermin,
// Solid State Physics, ch. 22). With q fractional, qa/2 = π q1.
func TestMonatomicChainDispersion(t *testing.T) {
	c := testmodels.Load(t, "chain")
	m := testmodels.Compile(t, c)
	K, M := c.Springs[0].KLong, c.Sites[0].MassAmu
	for _, q1 := range []float64{0.05, 0.1, 0.25, 0.3, 0.5, -0.4} {
		got := m.FrequenciesTHz([3]float64{q1})[0]
		want := 2 * math.Sqrt(K/M) * math.Abs(math.Sin(math.Pi*q1)) * physics.NuUnitTHz
		if !relClose(got, want, 1e-9) {
			t.Errorf("q=%v: got %.12g THz; want %.12g", q1, got, want)
		}
	}
}

// TestUnitFactor checks sqrt(eV/Å²/amu) = 15.6333042 THz (sqrt(e·10²⁰/m_u)/2π
// with CODATA 2018 e and m_u; 1e-7 relative covers the 2014–2022 editions).
func TestUnitFactor(t *testing.T) {
	if !relClose(physics.NuUnitTHz, 15.6333042, 1e-7) {
		t.Errorf("NuUnitTHz = %.10g; want 15.6333042", physics.NuUnitTHz)
	}
	if !relClose(physics.OmegaUnitRadPerS, 9.82269475025e13, 1e-9) {
		t.Errorf("OmegaUnitRadPerS = %.12g; want 9.82269475025e13", physics.OmegaUnitRadPerS)
	}
}

// TestFCCNearestNeighbour checks the fcc NN central-spring closed forms:
// at X ω²M/K = 8, 4, 4 and at L 8, 2, 2 (derived from the standard NN
// dynamical matrix, Ashcroft & Mermin ch. 22 problem 22.2).
func TestFCCNearestNeighbour(t *testing.T) {
	c := testmodels.Load(t, "fcc")
	m := testmodels.Compile(t, c)
	K, M := c.Shells[0].KLong, c.Sites[0].MassAmu
	cases := []struct {
		name string
		q    [3]float64
		want []float64 // ω²M/K ascending
	}{
		{"X", [3]float64{0.5, 0, 0.5}, []float64{4, 4, 8}},
		{"L", [3]float64{0.5, 0.5, 0.5}, []float64{2, 2, 8}},
	}
	for _, tc := range cases {
		got := m.FrequenciesTHz(tc.q)
		for k, w := range tc.want {
			want := math.Sqrt(w*K/M) * physics.NuUnitTHz
			if !relClose(got[k], want, 1e-9) {
				t.Errorf("%s branch %d: got %.10g THz; want %.10g", tc.name, k+1, got[k], want)
			}
		}
	}
}

// TestDiatomicChain checks the two-site chain (masses m < M, spring K):
// Γ optical sqrt(2K(1/m + 1/M)), zone boundary sqrt(2K/M) (acoustic top)
// and sqrt(2K/m) (optical bottom), and zero at Γ (Kittel, Introduction to
// Solid State Physics, ch. 4, diatomic lattice).
func TestDiatomicChain(t *testing.T) {
	c := testmodels.Load(t, "diatomic-chain")
	m := testmodels.Compile(t, c)
	K := c.Springs[0].KLong
	lo, hi := c.Sites[0].MassAmu, c.Sites[1].MassAmu // 20 and 50 amu
	cases := []struct {
		name string
		q    float64
		want [2]float64 // ω²/(K) per branch, ascending, amu⁻¹
	}{
		{"Γ", 0, [2]float64{0, 2 * (1/lo + 1/hi)}},
		{"zone boundary", 0.5, [2]float64{2 / hi, 2 / lo}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			got := m.FrequenciesTHz([3]float64{tc.q})
			for k, w := range tc.want {
				want := math.Sqrt(w*K) * physics.NuUnitTHz
				if math.Abs(got[k]-want) > 1e-9*physics.NuUnitTHz {
					t.Errorf("branch %d: %.12g THz; want %.12g", k+1, got[k], want)
				}
			}
		})
	}
	// Whole dispersion: ω² = K(1/m+1/M) ∓ K sqrt((1/m+1/M)² − 4 sin²(qa/2)/(mM))
	// for springs K between neighbours a/2 apart (Kittel ch. 4, the
	// two-atom chain, with C = K).
	for _, q := range []float64{0.1, 0.23, 0.37} {
		s := math.Sin(math.Pi * q)
		mu := 1/lo + 1/hi
		root := math.Sqrt(mu*mu - 4*s*s/(lo*hi))
		got := m.FrequenciesTHz([3]float64{q})
		for k, w2 := range []float64{K * (mu - root), K * (mu + root)} {
			if want := math.Sqrt(w2) * physics.NuUnitTHz; !relClose(got[k], want, 1e-10) {
				t.Errorf("q=%v branch %d: %.12g; want %.12g", q, k+1, got[k], want)
			}
		}
	}
}

// TestFCCNearestNeighbourWK extends TestFCCNearestNeighbour to W and K:
// W = (2π/a)(1, ½, 0): ω²M/K = 6, 6, 4 … ascending 4, 6, 6; K = (2π/a)(¾, ¾,
// 0): 4+2√2, 4+√2, 2+√2 (derived from the standard NN
// dynamical matrix D = (K/M) Σ_δ (1 − cos q·δ) δ̂δ̂ᵀ, Ashcroft & Mermin
// ch. 22). Fractional coordinates of W and K are those of Setyawan &
// Curtarolo (2010) for the fcc primitive cell of the example.
func TestFCCNearestNeighbourWK(t *testing.T) {
	c := testmodels.Load(t, "fcc")
	m := testmodels.Compile(t, c)
	K, M := c.Shells[0].KLong, c.Sites[0].MassAmu
	r2 := math.Sqrt2
	for _, tc := range []struct {
		name string
		q    [3]float64
		want []float64
	}{
		{"W", [3]float64{0.5, 0.25, 0.75}, []float64{4, 6, 6}},
		{"K", [3]float64{3.0 / 8, 3.0 / 8, 3.0 / 4}, []float64{2 + r2, 4 + r2, 4 + 2*r2}},
	} {
		got := m.FrequenciesTHz(tc.q)
		for k, w := range tc.want {
			if want := math.Sqrt(w*K/M) * physics.NuUnitTHz; !relClose(got[k], want, 1e-10) {
				t.Errorf("%s branch %d: %.12g THz; want %.12g", tc.name, k+1, got[k], want)
			}
		}
	}
}

// TestSquareNet: NN springs K and diagonal springs K′ = K/2 on the square
// net (p = 2): at X ω²M/K = 2, 6 and at M 4, 4; with K′ = 0 the transverse
// branch is flat at zero along Γ–X (derived
// from D = Σ_δ k_δ (1 − cos q·δ) δ̂δ̂ᵀ/M: at X = (π/a, 0) the NN bonds along
// x give 4K on xx, the four diagonals 2K′ on each of xx and yy).
func TestSquareNet(t *testing.T) {
	c := testmodels.Load(t, "square-net")
	m := testmodels.Compile(t, c)
	K, M := c.Shells[0].KLong, c.Sites[0].MassAmu
	if c.Shells[1].KLong != K/2 {
		t.Fatalf("example changed: K′ = %v, want K/2", c.Shells[1].KLong)
	}
	for _, tc := range []struct {
		name string
		q    [3]float64
		want []float64
	}{
		{"X", [3]float64{0.5, 0, 0}, []float64{2, 6}},
		{"M", [3]float64{0.5, 0.5, 0}, []float64{4, 4}},
	} {
		got := m.FrequenciesTHz(tc.q)
		for k, w := range tc.want {
			if want := math.Sqrt(w*K/M) * physics.NuUnitTHz; !relClose(got[k], want, 1e-10) {
				t.Errorf("%s branch %d: %.12g THz; want %.12g", tc.name, k+1, got[k], want)
			}
		}
	}
	c.Shells = c.Shells[:1] // K′ = 0
	m = testmodels.Compile(t, c)
	for _, x := range []float64{0.1, 0.25, 0.4, 0.5} {
		got := m.FrequenciesTHz([3]float64{x, 0, 0})
		if math.Abs(got[0]) > 1e-6 {
			t.Errorf("K′=0, q=(%v,0): transverse %.3g THz; want 0", x, got[0])
		}
		// Longitudinal: ω = 2 sqrt(K/M) |sin(πx)| (the chain along x).
		if want := 2 * math.Sqrt(K/M) * math.Sin(math.Pi*x) * physics.NuUnitTHz; !relClose(got[1], want, 1e-10) {
			t.Errorf("K′=0, q=(%v,0): longitudinal %.12g; want %.12g", x, got[1], want)
		}
	}
}

// springBlock is the force-constant block of a spring along r (Å):
// Φ = −(k∥ e eᵀ + k⊥ (1 − e eᵀ)) (doc.go).
func springBlock(r [3]float64, kl, kt float64) []float64 {
	l := lattice.Norm(r)
	phi := make([]float64, 9)
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			ee := r[a] * r[b] / (l * l)
			id := 0.0
			if a == b {
				id = 1
			}
			phi[3*a+b] = -(kl*ee + kt*(id-ee))
		}
	}
	return phi
}

// TestBlocksEqualSprings: the rock-salt-like crystal given as explicit
// blocks (the spring blocks of its shells, common practice) has the same
// spectrum as its shell form, and the sum rule builds the self terms.
func TestBlocksEqualSprings(t *testing.T) {
	c := testmodels.Load(t, "rocksalt-like")
	ref := testmodels.Compile(t, c)
	bc := &physics.Crystal{Lattice: c.Lattice, Sites: c.Sites, ForceUnit: c.ForceUnit}
	for _, sh := range c.Shells {
		bonds, err := ref.ShellBonds(context.Background(), sh)
		if err != nil {
			t.Fatal(err)
		}
		for _, b := range bonds {
			bc.Blocks = append(bc.Blocks, physics.Block{From: b.From, To: b.To, Cell: b.N[:], Phi: springBlock(b.R, sh.KLong, sh.KTrans)})
		}
	}
	m := testmodels.Compile(t, bc)
	if m.SumRuleViolation() != 0 {
		t.Errorf("no on-site block given: violation %v; want 0", m.SumRuleViolation())
	}
	for _, q := range [][3]float64{{0, 0, 0}, {0.1, 0.2, 0.3}, {0.5, 0.5, 0.5}, {0.5, 0, 0.5}} {
		if got, want := m.FrequenciesTHz(q), ref.FrequenciesTHz(q); !testmodels.CloseSpectra(got, want, 1e-12) {
			t.Errorf("q=%v: blocks %v; springs %v", q, got, want)
		}
	}
}

// TestSumRuleReportAndEnforcement: an on-site block that breaks the
// acoustic sum rule Σ_{j,n} Φ(0i; nj) = 0 (Born & Huang, Dynamical Theory of
// Crystal Lattices, §23; common practice) is reported as the largest
// component of that sum, moves the acoustic modes at Γ off zero, and is
// replaced when enforcement is asked.
func TestSumRuleReportAndEnforcement(t *testing.T) {
	c := &physics.Crystal{
		Lattice:       [][3]float64{{3, 0, 0}},
		Polarizations: 1,
		Sites:         []physics.Site{{Label: "A", MassAmu: 12, Frac: []float64{0}}},
		Blocks: []physics.Block{
			{From: 0, To: 0, Cell: []int{1}, Phi: []float64{-1.5, 0, 0, 0, 0, 0, 0, 0, 0}},
			// Correct on-site value 2·1.5 = 3; given 3.2: violation 0.2.
			{From: 0, To: 0, Cell: []int{0}, Phi: []float64{3.2, 0, 0, 0, 0, 0, 0, 0, 0}},
		},
	}
	plain := testmodels.Compile(t, c)
	if v := plain.SumRuleViolation(); math.Abs(v-0.2) > 1e-12 {
		t.Errorf("violation %v eV/Å²; want 0.2", v)
	}
	// Γ: ω² = 0.2/M.
	if got, want := plain.FrequenciesTHz([3]float64{})[0], math.Sqrt(0.2/12)*physics.NuUnitTHz; !relClose(got, want, 1e-10) {
		t.Errorf("unenforced Γ: %v THz; want %v", got, want)
	}
	enforced, err := physics.Compile(context.Background(), c, physics.Options{EnforceSumRule: true})
	if err != nil {
		t.Fatal(err)
	}
	if v := enforced.SumRuleViolation(); math.Abs(v-0.2) > 1e-12 {
		t.Errorf("violation is reported before enforcement: %v; want 0.2", v)
	}
	if got := enforced.FrequenciesTHz([3]float64{})[0]; math.Abs(got) > 1e-9 {
		t.Errorf("enforced Γ: %v THz; want 0", got)
	}
	// Enforced spectrum is the chain's: 2 sqrt(K/M)|sin(πq)| (Kittel ch. 4).
	if got, want := enforced.FrequenciesTHz([3]float64{0.3})[0], 2*math.Sqrt(1.5/12)*math.Sin(0.3*math.Pi)*physics.NuUnitTHz; !relClose(got, want, 1e-10) {
		t.Errorf("enforced q=0.3: %v; want %v", got, want)
	}
	if plain.Hash() == enforced.Hash() {
		t.Error("enforcing a violated sum rule changes results, so it must change the hash")
	}
}

// TestImaginaryModes: a negative spring gives ω² < 0, reported as a
// negative frequency −sqrt(|ω²|) (common practice) with the point flagged.
func TestImaginaryModes(t *testing.T) {
	c := &physics.Crystal{
		Lattice:       [][3]float64{{2, 0, 0}},
		Polarizations: 1,
		Sites:         []physics.Site{{Label: "A", MassAmu: 4, Frac: []float64{0}}},
		Springs: []physics.Spring{
			{From: 0, To: 0, Cell: []int{1}, KLong: 1},
			{From: 0, To: 0, Cell: []int{2}, KLong: -0.5},
		},
	}
	m := testmodels.Compile(t, c)
	// ω² = (4/M)(K₁ sin²(πq) + K₂ sin²(2πq)) for first and second
	// neighbours (Kittel ch. 4, problem on second-neighbour forces).
	for _, q := range []float64{0.05, 0.2, 0.5} {
		w2 := 4 / 4.0 * (1*math.Pow(math.Sin(math.Pi*q), 2) - 0.5*math.Pow(math.Sin(2*math.Pi*q), 2))
		want := math.Copysign(math.Sqrt(math.Abs(w2)), w2) * physics.NuUnitTHz
		pm := m.Point([3]float64{q}, physics.ModeOptions{})
		if !relClose(pm.FreqTHz[0], want, 1e-10) {
			t.Errorf("q=%v: %.12g THz; want %.12g", q, pm.FreqTHz[0], want)
		}
		if pm.Imaginary != (want < 0) {
			t.Errorf("q=%v: Imaginary = %v for %v THz", q, pm.Imaginary, want)
		}
	}
}

// TestFrequencyUnits: 1 THz = 4.135667697 meV = 33.35640952 cm⁻¹ =
// 2π·10¹² rad/s (h·10¹²/e and 10¹⁰/c with CODATA 2018 h, e and c; 1e-9
// relative).
func TestFrequencyUnits(t *testing.T) {
	for _, tc := range []struct {
		name string
		u    physics.Unit
		want float64
	}{
		{"THz", physics.THz, 1}, {"meV", physics.MeV, 4.135667697}, {"cm-1", physics.CM1, 33.35640952}, {"rad/s", physics.RadPerS, 2 * math.Pi * 1e12},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if got := tc.u.FromTHz(1); !relClose(got, tc.want, 1e-9) {
				t.Errorf("1 THz = %.10g; want %.10g", got, tc.want)
			}
			if got := tc.u.ToTHz(tc.u.FromTHz(2.5)); !relClose(got, 2.5, 1e-15) {
				t.Errorf("round trip 2.5 THz = %v", got)
			}
		})
	}
}
