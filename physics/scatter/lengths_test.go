package scatter

import (
	"math"
	"strings"
	"testing"
)

// halfUnit is half a unit of the last printed digit of s.
func halfUnit(s string) float64 {
	if i := strings.IndexByte(s, '.'); i >= 0 {
		return 0.5 * math.Pow(10, -float64(len(s)-i-1))
	}
	return 0.5
}

// TestTableCoherentConsistent checks every transcribed row against itself:
// the bound coherent cross-section is σ_coh = 4π b_c² (Sears 1992, eq. for
// bound cross-sections; 1 barn = 100 fm²), so a wrong digit in b_c or
// σ_coh shows. The tolerance is the rounding of both printed numbers plus
// 0.1 % (the tables print b_c and σ_coh from separate measurements; Sn,
// 6.225 fm and 4.871 barn, is 0.03 % apart).
func TestTableCoherentConsistent(t *testing.T) {
	for _, e := range Elements() {
		f := strings.Fields(e.text)
		calc := 4 * math.Pi * e.CoherentFm * e.CoherentFm / 100
		tol := 4*math.Pi*2*math.Abs(e.CoherentFm)*halfUnit(f[2])/100 + halfUnit(f[3]) + 1e-3*e.CoherentBarn
		if math.Abs(calc-e.CoherentBarn) > tol {
			t.Errorf("%s: 4π b² = %.5g barn from b = %s fm, table σ_coh = %s barn (tolerance %.2g)", e.Symbol, calc, f[2], f[3], tol)
		}
		if e.IncoherentBarn < 0 || e.WeightAmu <= 0 || e.Z <= 0 {
			t.Errorf("%s: bad row %q", e.Symbol, e.text)
		}
	}
	if n := len(Elements()); n < 50 {
		t.Errorf("table has %d elements, want the 56 transcribed", n)
	}
}

// TestLookup checks the label rule and the natural-mass check.
func TestLookup(t *testing.T) {
	tests := []struct {
		name, label string
		mass        float64
		want        string  // symbol, "" for an error
		err         string  // part of the error
		b           float64 // expected b_c, fm (Sears 1992)
	}{
		{"plain", "Si", 28.0855, "Si", "", 4.1491},
		{"suffix digit", "O2", 15.999, "O", "", 5.803},
		{"suffix underscore", "Fe_a", 55.85, "Fe", "", 9.45},
		{"ion", "Na+", 22.99, "Na", "", 3.63},
		{"mass typed to 3 figures", "Pb", 207, "Pb", "", 9.405},
		{"isotope refused", "Li", 7.016, "", "natural atomic weight", 0},
		{"deuterium refused", "H", 2.014, "", "natural atomic weight", 0},
		{"invented label of an element's name", "P", 25, "", "natural atomic weight", 0},
		{"unknown", "Q", 80, "", "no built-in scattering length for label \"Q\"", 0},
		{"absorber left out", "Gd", 157.25, "", "no built-in", 0},
		{"case matters", "SI", 28.09, "", "no built-in", 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			e, err := Lookup(tt.label, tt.mass)
			if tt.want == "" {
				if err == nil || !strings.Contains(err.Error(), tt.err) {
					t.Fatalf("Lookup(%q, %g) = %v, %v; want an error with %q", tt.label, tt.mass, e.Symbol, err, tt.err)
				}
				return
			}
			if err != nil || e.Symbol != tt.want || e.CoherentFm != tt.b {
				t.Fatalf("Lookup(%q, %g) = %s b=%g, %v; want %s b=%g", tt.label, tt.mass, e.Symbol, e.CoherentFm, err, tt.want, tt.b)
			}
		})
	}
}
