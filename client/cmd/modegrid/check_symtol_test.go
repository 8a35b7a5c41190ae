package main

import (
	"strings"
	"testing"
)

// TestCheckSymmetryTolerance: the honeycomb test model (lattice typed to 6
// decimals) gets the 12 operations of 6mm at the default tolerance (plane
// group p6mm; International Tables for Crystallography, Vol. A); at a
// tolerance below its typing error check finds fewer and says that a
// looser one finds 12; --symmetrize gives a new model hash, marked.
func TestCheckSymmetryTolerance(t *testing.T) {
	row := func(out, name string) string {
		for _, l := range strings.Split(out, "\n") {
			if strings.HasPrefix(l, name) {
				return strings.TrimSpace(strings.TrimPrefix(l, name))
			}
		}
		return ""
	}
	_, def, _ := runCLI(t, "check", "-m", testdata("honeycomb.json"))
	if got := row(def, "symmetry operations"); got != "12" {
		t.Errorf("default tolerance: %q operations; want 12", got)
	}
	if got := row(def, "symmetry tolerance (Å)"); got != "0.0001" {
		t.Errorf("tolerance row %q; want 0.0001", got)
	}
	if h := row(def, "symmetry hint"); h != "" {
		t.Errorf("default tolerance: unexpected hint %q", h)
	}
	code, tight, errs := runCLI(t, "check", "-m", testdata("honeycomb.json"), "--sym-tol", "1e-9")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if got := row(tight, "symmetry operations"); got != "4" {
		t.Errorf("1e-9 Å: %q operations; want 4", got)
	}
	if h := row(tight, "symmetry hint"); !strings.Contains(h, "12 at 0.0001 Å") || !strings.Contains(h, "--sym-tol 0.0001") {
		t.Errorf("1e-9 Å: hint %q; want 12 at 0.0001 Å and --sym-tol 0.0001", h)
	}
	_, sym, _ := runCLI(t, "check", "-m", testdata("honeycomb.json"), "--symmetrize")
	if row(sym, "model hash") == row(def, "model hash") || row(sym, "symmetrized") == "" {
		t.Errorf("--symmetrize: hash %s (plain %s), symmetrized row %q; want a new hash, marked",
			row(sym, "model hash"), row(def, "model hash"), row(sym, "symmetrized"))
	}
	code, _, errs = runCLI(t, "check", "-m", testdata("honeycomb.json"), "--sym-tol", "5")
	if code == exitOK || !strings.Contains(errs, "symmetry_tolerance_a") {
		t.Errorf("--sym-tol 5: exit %d, stderr %q; want a refusal naming symmetry_tolerance_a", code, errs)
	}
}
