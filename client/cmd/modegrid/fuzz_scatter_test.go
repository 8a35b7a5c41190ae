package main

import (
	"strconv"
	"strings"
	"testing"
)

// FuzzParseScatterers: --b, --sigma-inc and --xray-f. Invariants as the
// other parser targets: no panic, an error is a sentence, and an accepted
// set has one entry per label, finite numbers, non-negative cross-sections
// given with a length, form factors of matching a and b, and survives a
// round trip through its printed form.
func FuzzParseScatterers(f *testing.F) {
	for _, s := range [][3]string{
		{"P=3;Q=6", "Q=2", ""}, {"", "", "M=26"}, {"", "", "Q=10,2,5,20,1;P=3"}, {"A=1", "B=2", ""}, {"A=1;A=2", "", ""},
		{"Fe_a=9.45", "Fe_a=0.4", ""}, {"X=NaN", "", ""}, {"", "", "Q=1,2"}, {"=3", "", ""}, {"A=1,2", "", ""}, {"A=", "", ""},
		{"A′=-3.7", "A′=1e-3", "A′=1,2,3,4,5,6,7,8,9"}, {" ; ", "", ""},
	} {
		f.Add(s[0], s[1], s[2])
	}
	f.Fuzz(func(t *testing.T, b, sigma, xray string) {
		if len(b)+len(sigma)+len(xray) > fuzzMaxInput {
			return
		}
		in := scattererFlags{b: b, sigmaInc: sigma, xrayF: xray}
		sc, err := parseScatterers(in)
		if err != nil {
			checkErrMessage(t, b+"|"+sigma+"|"+xray, err)
			return
		}
		seen := map[string]bool{}
		var pb, ps, px []string
		for _, s := range sc {
			l := s.GetLabel()
			if seen[l] || checkLabel(l) != nil {
				t.Fatalf("label %q twice or malformed", l)
			}
			seen[l] = true
			ff := s.GetFormFactor()
			checkFinite(t, "lengths", s.GetCoherentFm(), s.GetIncoherentBarn(), ff.GetC())
			checkFinite(t, "form factor", append(ff.GetA(), ff.GetBA2()...)...)
			if s.IncoherentBarn != nil && (s.CoherentFm == nil || s.GetIncoherentBarn() < 0) {
				t.Fatalf("%s: σ_inc %v without a length or negative", l, s.GetIncoherentBarn())
			}
			if len(ff.GetA()) != len(ff.GetBA2()) || len(ff.GetA()) > 4 {
				t.Fatalf("%s: %d a, %d b", l, len(ff.GetA()), len(ff.GetBA2()))
			}
			g := func(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }
			if s.CoherentFm != nil {
				pb = append(pb, l+"="+g(s.GetCoherentFm()))
			}
			if s.IncoherentBarn != nil {
				ps = append(ps, l+"="+g(s.GetIncoherentBarn()))
			}
			if ff != nil {
				var nums []string
				for k := range ff.GetA() {
					nums = append(nums, g(ff.GetA()[k]), g(ff.GetBA2()[k]))
				}
				px = append(px, l+"="+strings.Join(append(nums, g(ff.GetC())), ","))
			}
		}
		again, err := parseScatterers(scattererFlags{b: strings.Join(pb, ";"), sigmaInc: strings.Join(ps, ";"), xrayF: strings.Join(px, ";")})
		if err != nil || len(again) != len(sc) {
			t.Fatalf("round trip of %q|%q|%q: %v (%d entries, want %d)", b, sigma, xray, err, len(again), len(sc))
		}
	})
}
