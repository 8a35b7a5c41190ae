package physics

import (
	"math"
	"testing"
)

func relClose(got, want, tol float64) bool {
	return math.Abs(got-want) <= tol*math.Max(math.Abs(want), 1e-300)
}

// TestMonatomicChainDispersion checks ω(q) = 2 sqrt(K/M) |sin(qa/2)|
// (Kittel, Introduction to Solid State Physics, ch. 4; Ashcroft & Mermin,
// Solid State Physics, ch. 22). With q fractional, qa/2 = π q1.
func TestMonatomicChainDispersion(t *testing.T) {
	c := loadExample(t, "chain")
	m := mustCompile(t, c)
	K, M := c.Springs[0].KLong, c.Sites[0].MassAmu
	for _, q1 := range []float64{0.05, 0.1, 0.25, 0.3, 0.5, -0.4} {
		got := m.FrequenciesTHz([3]float64{q1})[0]
		want := 2 * math.Sqrt(K/M) * math.Abs(math.Sin(math.Pi*q1)) * NuUnitTHz
		if !relClose(got, want, 1e-9) {
			t.Errorf("q=%v: got %.12g THz; want %.12g", q1, got, want)
		}
	}
}

// TestUnitFactor checks sqrt(eV/Å²/amu) = 15.6333042 THz (CODATA 2018,
// ../shared reference values: 1e-7 relative).
func TestUnitFactor(t *testing.T) {
	if !relClose(NuUnitTHz, 15.6333042, 1e-7) {
		t.Errorf("NuUnitTHz = %.10g; want 15.6333042", NuUnitTHz)
	}
	if !relClose(OmegaUnitRadPerS, 9.82269475025e13, 1e-9) {
		t.Errorf("OmegaUnitRadPerS = %.12g; want 9.82269475025e13", OmegaUnitRadPerS)
	}
}

// TestFCCNearestNeighbour checks the fcc NN central-spring closed forms:
// at X ω²M/K = 8, 4, 4 and at L 8, 2, 2 (derived from the standard NN
// dynamical matrix, Ashcroft & Mermin ch. 22 problem 22.2).
func TestFCCNearestNeighbour(t *testing.T) {
	c := loadExample(t, "fcc")
	m := mustCompile(t, c)
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
			want := math.Sqrt(w*K/M) * NuUnitTHz
			if !relClose(got[k], want, 1e-9) {
				t.Errorf("%s branch %d: got %.10g THz; want %.10g", tc.name, k+1, got[k], want)
			}
		}
	}
}
