package main

import (
	"flag"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

var updateFigures = flag.Bool("update-figures", false, "rewrite testdata/figures/*.png for reviewers")

// TestFigureGallery draws the figures of the CLI end to end on the example
// crystals (embedded server, real computations), with measured data from
// testdata, and checks the residual listings. With -update-figures the
// PNGs are written to testdata/figures for a look.
func TestFigureGallery(t *testing.T) {
	dir := t.TempDir()
	if *updateFigures {
		dir = filepath.Join("testdata", "figures")
		if err := os.MkdirAll(dir, 0o755); err != nil {
			t.Fatal(err)
		}
	}
	tests := []struct {
		name string
		args []string
		want []string // in standard output
	}{
		{"path-rocksalt-like-measured", []string{"path", "-m", example("rocksalt-like"), "--unit", "mev", "--grid", "12",
			"--follow-modes", "--measured", testdata("measured-path.csv")},
			[]string{"measured ν (meV)", "(measured − model)/σ", "7 measured points: rms(measured − model) ="}},
		{"path-diatomic-chain-cm-1", []string{"path", "-m", example("diatomic-chain"), "--unit", "cm-1", "--grid", "64"}, nil},
		{"dos-rocksalt-like-stacked", []string{"dos", "-m", example("rocksalt-like"), "--grid", "12", "--per-site", "--stack"}, nil},
		{"thermal-diatomic-chain-measured", []string{"thermal", "-m", example("diatomic-chain"), "--grid", "64", "--temps", "0:400:10",
			"--measured", testdata("measured-thermal.csv")},
			[]string{"measured Cv (J/(mol·K), per mole of cells)", "5 measured points", "χ²/N ="}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			file := filepath.Join(dir, tc.name+".png")
			code, out, stderr := runCLI(t, append(tc.args, "--plot", file)...)
			if code != exitOK {
				t.Fatalf("exit %d: %s", code, stderr)
			}
			for _, w := range tc.want {
				if !strings.Contains(out, w) {
					t.Errorf("output lacks %q:\n%s", w, out)
				}
			}
			if _, _, ink, _ := pngStats(t, file); ink < 0.01 {
				t.Errorf("%s is nearly blank (%.2f%% ink)", file, 100*ink)
			}
		})
	}
}

// TestMeasuredCSVErrors: bad measured files are refused with the file,
// line and column, every bad row at once.
func TestMeasuredCSVErrors(t *testing.T) {
	dir := t.TempDir()
	write := func(name, body string) string {
		f := filepath.Join(dir, name)
		if err := os.WriteFile(f, []byte(body), 0o644); err != nil {
			t.Fatal(err)
		}
		return f
	}
	tests := []struct {
		name, body string
		thermal    bool
		want       []string
	}{
		{"header", "T,Cv\n1,2\n", true, []string{":1: header \"T,Cv\"; want T_K,Cv_J_per_molcell_K"}},
		{"basis", "T_K,Cv_J_per_mol_K\n1,2\n", true, []string{":1: column 2: \"Cv_J_per_mol_K\"; want Cv_J_per_molcell_K or Cv_J_per_molatom_K"}},
		{"numbers", "# c\nT_K,Cv_J_per_molcell_K,sigma\n10,abc,1\n-5,1,1\n20,1,0\n", true,
			[]string{":3: column 2: Cv_J_per_molcell_K: \"abc\" is not a finite number", ":4: column 1: T_K must be ≥ 0",
				":5: column 3: sigma must be > 0"}},
		{"unit", "q1,q2,q3,freq_GHz\n0,0,0,1\n", false, []string{":1: column 4: want freq_THz, freq_meV or freq_cm-1"}},
		{"branch", "distance_invA,freq_THz,branch\n0.1,1,1.5\n0.2,1,2,3\n", false,
			[]string{":2: column 3: branch must be a whole number ≥ 1", ":3: 4 columns; the header has 3"}},
		{"empty", "# nothing\n", false, []string{":1: empty file"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			f := write(tc.name+".csv", tc.body)
			var err error
			if tc.thermal {
				_, err = readThermalMeasured(f, 2)
			} else {
				_, err = readPathMeasured(f, 1)
			}
			if err == nil {
				t.Fatal("accepted")
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), f+w) {
					t.Errorf("error %q lacks %q", err, f+w)
				}
			}
		})
	}
	// Off the path: the CLI names the line.
	f := write("off.csv", "q1,q2,q3,freq_THz\n0.25,0.1,0,1\n")
	code, _, stderr := runCLI(t, "path", "-m", example("diatomic-chain"), "--measured", f)
	if code == exitOK || !strings.Contains(stderr, f+":2: column 1: q = (0.25, 0.1, 0) is not on the path") {
		t.Errorf("exit %d, stderr %q; want the line of the point off the path", code, stderr)
	}
}

// TestConnectDeprecated: the old --connect still follows modes, with a note.
func TestConnectDeprecated(t *testing.T) {
	code, out, stderr := runCLI(t, "path", "-m", example("diatomic-chain"), "--points", "5", "--connect", "--format", "json")
	if code != exitOK || !strings.Contains(stderr, "--connect is deprecated; it is now called --follow-modes") ||
		!strings.Contains(out, "follow_modes=true") {
		t.Errorf("exit %d, stderr %q, output %q", code, stderr, out)
	}
}
